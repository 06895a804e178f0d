using System.Buffers;
using Assay.Config;
using Assay.Kernels;
using static Assay.Kernels.Kernels;

namespace Assay.Model;

/// <summary>
/// One forward pass over a ragged batch. Activations are [T, ·] row-major over the T tokens of all sequences laid end
/// to end; the matrix products see all T rows at once, attention sees each sequence alone.
/// </summary>
internal readonly struct ForwardPass(ModelWeights weights, ModelConfig config, KernelVariant variant, ParallelOptions parallel)
{
    public ForwardResult Run(IReadOnlyList<int[]> sequences, int[] starts, int[] lengths, int total, ForwardOptions options)
    {
        int d = config.Width, m = config.InnerWidth;
        var wanted = new HashSet<int>(options.HiddenLayers);
        var hidden = new Dictionary<int, float[]>();

        // Working buffers come from the shared pool (each is fully written before it is read), so a long run's
        // batches reuse them instead of leaving ~40·T·d bytes of large-object garbage per pass.
        ArrayPool<float> pool = ArrayPool<float>.Shared;
        float[] x = pool.Rent(total * d);           // residual stream
        float[] h = pool.Rent(total * d);           // normalized input of a sublayer
        float[] qkv = pool.Rent(total * 3 * d);
        float[] attn = pool.Rent(total * d);
        float[] mlp = pool.Rent(total * m);
        try
        {
            return Layers(sequences, starts, lengths, total, options, wanted, hidden, x, h, qkv, attn, mlp);
        }
        finally
        {
            pool.Return(x);
            pool.Return(h);
            pool.Return(qkv);
            pool.Return(attn);
            pool.Return(mlp);
        }
    }

    private ForwardResult Layers(IReadOnlyList<int[]> sequences, int[] starts, int[] lengths, int total, ForwardOptions options,
        HashSet<int> wanted, Dictionary<int, float[]> hidden, float[] x, float[] h, float[] qkv, float[] attn, float[] mlp)
    {
        int d = config.Width, m = config.InnerWidth, layers = config.Layers;
        Embed(sequences, starts, x);
        Keep(0, x, total * d, wanted, hidden);

        for (int l = 0; l < layers; l++)
        {
            BlockWeights b = weights.Blocks[l];
            Normalize(x, h, total, b.Norm1Gain, b.Norm1Bias);
            Gemm(h, total, d, b.Attention, qkv, 3 * d, accumulate: false, variant, parallel);
            Attention(qkv, attn, starts, lengths);
            Gemm(attn, total, d, b.AttentionOut, x, d, accumulate: true, variant, parallel);

            Normalize(x, h, total, b.Norm2Gain, b.Norm2Bias);
            Gemm(h, total, d, b.MlpIn, mlp, m, accumulate: false, variant, parallel, epilogue: config.Activation);
            Gemm(mlp, total, m, b.MlpOut, x, d, accumulate: true, variant, parallel);

            if (l + 1 < layers)
            {
                Keep(l + 1, x, total * d, wanted, hidden);
            }
        }

        Normalize(x, h, total, weights.FinalNormGain, weights.FinalNormBias);
        Keep(layers, h, total * d, wanted, hidden);

        float[] logits = Head(h, starts, lengths, total, options.Logits);
        return new ForwardResult(d, config.VocabularySize, starts, lengths, hidden, logits, options.Logits);
    }

    /// <summary>Rows a worker takes at a time in LayerNorm.</summary>
    private const int RowBlock = 32;

    /// <summary>LayerNorm of every row, rows spread over the workers (each row's result is its own: same bits).</summary>
    private void Normalize(float[] x, float[] y, int rows, float[] gain, float[] bias)
    {
        int d = config.Width;
        float epsilon = config.NormEpsilon;
        ForRowBlocks(rows, (first, count) => LayerNorm(x.AsSpan(first * d, count * d), y.AsSpan(first * d, count * d), count, gain, bias, epsilon));
    }

    private void ForRowBlocks(int rows, Action<int, int> body)
    {
        int blocks = (rows + RowBlock - 1) / RowBlock;
        if (blocks <= 1)
        {
            body(0, rows);
            return;
        }
        Parallel.For(0, blocks, parallel, i => body(i * RowBlock, Math.Min(RowBlock, rows - (i * RowBlock))));
    }

    private void Embed(IReadOnlyList<int[]> sequences, int[] starts, float[] x)
    {
        int d = config.Width;
        float[] wpe = weights.PositionEmbedding;
        for (int s = 0; s < sequences.Count; s++)
        {
            int[] seq = sequences[s];
            for (int t = 0; t < seq.Length; t++)
            {
                Span<float> row = x.AsSpan((starts[s] + t) * d, d);
                weights.TokenEmbedding.CopyColumn(seq[t], row);
                System.Numerics.Tensors.TensorPrimitives.Add(row, wpe.AsSpan(t * d, d), row);
            }
        }
    }

    private void Attention(float[] qkv, float[] output, int[] starts, int[] lengths)
    {
        int d = config.Width, heads = config.Heads, hd = config.HeadWidth;
        int work = lengths.Length * heads;
        int longest = lengths.Max();
        KernelVariant kernels = variant;
        Parallel.For(0, work, parallel, () => new float[longest * (hd + 1)], (i, _, scratch) =>
        {
            int s = i / heads, head = i % heads;
            int start = starts[s], length = lengths[s];
            CausalAttentionHead(qkv.AsSpan(start * 3 * d, length * 3 * d), output.AsSpan(start * d, length * d),
                length, d, head, hd, scratch.AsSpan(0, longest), scratch.AsSpan(longest), kernels);
            return scratch;
        }, static _ => { });
    }

    private float[] Head(float[] normed, int[] starts, int[] lengths, int total, LogitPositions where)
    {
        int d = config.Width, v = config.VocabularySize;
        switch (where)
        {
            case LogitPositions.None:
                return [];
            case LogitPositions.All:
            {
                float[] all = new float[(long)total * v];
                Gemm(normed, total, d, weights.Head, all, v, accumulate: false, variant, parallel);
                return all;
            }
            default:
            {
                // Only the rows asked for go through the V-wide product.
                float[] last = new float[lengths.Length * d];
                for (int s = 0; s < lengths.Length; s++)
                {
                    normed.AsSpan((starts[s] + lengths[s] - 1) * d, d).CopyTo(last.AsSpan(s * d, d));
                }
                float[] logits = new float[(long)lengths.Length * v];
                Gemm(last, lengths.Length, d, weights.Head, logits, v, accumulate: false, variant, parallel);
                return logits;
            }
        }
    }

    private static void Keep(int layer, float[] state, int length, HashSet<int> wanted, Dictionary<int, float[]> hidden)
    {
        if (wanted.Contains(layer))
        {
            hidden[layer] = state.AsSpan(0, length).ToArray();
        }
    }
}
