using System.Numerics.Tensors;
using Assay.Kernels;
using Assay.Model.Blocks;

namespace Assay.Model.Gpt2;

/// <summary>GPT-2's input layer: the token's embedding plus the learned embedding of its position.</summary>
/// <param name="tokens">E (V × d) packed as Eᵀ (d × V): column v is token v's embedding.</param>
/// <param name="positions">P × d row-major.</param>
internal sealed class Gpt2Embedding(PackedMatrix tokens, float[] positions) : IEmbedding
{
    /// <summary>The packed token table (the output head too, when tied).</summary>
    public PackedMatrix Tokens => tokens;

    public long Bytes => tokens.Bytes + (4L * positions.LongLength);

    public void Embed(IReadOnlyList<int[]> sequences, ForwardBatch batch, float[] x)
    {
        int d = tokens.Rows;
        for (int s = 0; s < sequences.Count; s++)
        {
            int[] seq = sequences[s];
            for (int t = 0; t < seq.Length; t++)
            {
                Span<float> row = x.AsSpan((batch.Starts[s] + t) * d, d);
                tokens.CopyColumn(seq[t], row);
                TensorPrimitives.Add(row, positions.AsSpan(t * d, d), row);
            }
        }
    }
}
