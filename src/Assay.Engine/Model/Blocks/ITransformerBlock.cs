namespace Assay.Model.Blocks;

/// <summary>
/// One block of a decoder-only transformer: it reads the residual stream and adds its sublayers' outputs to it. A
/// block recipe (norm, position scheme, attention, MLP, residual wiring) is one implementation, in its own file.
/// </summary>
internal interface ITransformerBlock
{
    /// <summary>Bytes the block's parameters take in memory.</summary>
    long Bytes { get; }

    /// <summary>
    /// Updates the residual stream <paramref name="x"/> (T × d, row-major) in place; <paramref name="scratch"/> is a
    /// T × d buffer the block may overwrite. Each output row depends only on its own sequence's rows.
    /// </summary>
    void Apply(float[] x, float[] scratch, ForwardBatch batch);
}
