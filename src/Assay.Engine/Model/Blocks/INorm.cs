namespace Assay.Model.Blocks;

/// <summary>A row-wise normalization with its parameters (a block's norms, the final norm).</summary>
internal interface INorm
{
    /// <summary>Bytes the parameters take.</summary>
    long Bytes { get; }

    /// <summary>Normalizes the first <paramref name="rows"/> rows of <paramref name="x"/> into <paramref name="y"/>, rows spread over the workers.</summary>
    void Apply(float[] x, float[] y, int rows, ForwardBatch batch);
}
