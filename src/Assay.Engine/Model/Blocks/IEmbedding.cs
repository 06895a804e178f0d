namespace Assay.Model.Blocks;

/// <summary>The input layer: token ids to the first residual stream (layer 0 of the hidden states).</summary>
internal interface IEmbedding
{
    /// <summary>Bytes the embedding's parameters take in memory.</summary>
    long Bytes { get; }

    /// <summary>Writes the T × d rows of layer 0 for every sequence of the batch.</summary>
    void Embed(IReadOnlyList<int[]> sequences, ForwardBatch batch, float[] x);
}
