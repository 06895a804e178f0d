using Assay.Kernels;

namespace Assay.Model.Blocks;

/// <summary>The input layer of the rotary families: each token's embedding alone (positions enter through rotary attention).</summary>
/// <param name="tokens">E (V × d) packed as Eᵀ (d × V): column v is token v's embedding.</param>
internal sealed class TokenEmbedding(PackedMatrix tokens) : IEmbedding
{
    /// <summary>The packed token table (the output head too, when tied).</summary>
    public PackedMatrix Tokens => tokens;

    public long Bytes => tokens.Bytes;

    public void Embed(IReadOnlyList<int[]> sequences, ForwardBatch batch, float[] x)
    {
        int d = tokens.Rows;
        for (int s = 0; s < sequences.Count; s++)
        {
            int[] seq = sequences[s];
            for (int t = 0; t < seq.Length; t++)
            {
                tokens.CopyColumn(seq[t], x.AsSpan((batch.Starts[s] + t) * d, d));
            }
        }
    }
}
