using System.Buffers;
using Assay.Config;
using Assay.Kernels;
using Assay.Model.Blocks;

namespace Assay.Model;

/// <summary>
/// One forward pass over a ragged batch. Activations are [T, ·] row-major over the T tokens of all sequences laid end
/// to end; the matrix products see all T rows at once, attention sees each sequence alone. The pass knows no block
/// recipe: it embeds, runs each <see cref="ITransformerBlock"/>, applies the final norm and the head, and keeps the
/// layers asked for. Each stage's output is checked for NaN and infinities (<see cref="NonFiniteValueException"/>), so
/// none reaches a feature.
/// </summary>
internal readonly struct ForwardPass(ModelWeights weights, ModelConfig config, KernelVariant variant, ParallelOptions parallel, string modelFolder)
{
    public ForwardResult Run(IReadOnlyList<int[]> sequences, int[] starts, int[] lengths, int total, ForwardOptions options)
    {
        int d = config.Width, layers = weights.Blocks.Count;
        var wanted = new HashSet<int>(options.HiddenLayers);
        var hidden = new Dictionary<int, float[]>();
        var batch = new ForwardBatch(starts, lengths, total, variant, parallel);

        // The residual stream and one scratch row per token, from the shared pool (each is fully written before it is read).
        ArrayPool<float> pool = ArrayPool<float>.Shared;
        float[] x = pool.Rent(total * d);
        float[] h = pool.Rent(total * d);
        try
        {
            weights.Embedding.Embed(sequences, batch, x);
            Checked(0, x, starts, lengths, total);
            Keep(0, x, total * d, wanted, hidden);
            for (int l = 0; l < layers; l++)
            {
                weights.Blocks[l].Apply(x, h, batch);
                Checked(l + 1, x, starts, lengths, total);
                if (l + 1 < layers)
                {
                    Keep(l + 1, x, total * d, wanted, hidden);
                }
            }
            weights.FinalNorm.Apply(x, h, total, batch);
            Checked(layers, h, starts, lengths, total);
            Keep(layers, h, total * d, wanted, hidden);

            float[] logits = Logits(h, starts, lengths, total, options.Logits);
            return new ForwardResult(d, config.VocabularySize, starts, lengths, hidden, logits, options.Logits);
        }
        finally
        {
            pool.Return(x);
            pool.Return(h);
        }
    }

    private float[] Logits(float[] normed, int[] starts, int[] lengths, int total, LogitPositions where)
    {
        int d = config.Width, v = config.VocabularySize;
        switch (where)
        {
            case LogitPositions.None:
                return [];
            case LogitPositions.All:
            {
                float[] all = new float[(long)total * v];
                weights.Head.Logits(normed, total, all, parallel, variant);
                NonFiniteValueException.Check(all, v, "the logits", starts, lengths, modelFolder);
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
                weights.Head.Logits(last, lengths.Length, logits, parallel, variant);
                NonFiniteValueException.CheckRows(logits, v, s => (s, lengths[s] - 1), modelFolder);
                return logits;
            }
        }
    }

    /// <summary>The residual stream after <paramref name="layer"/> blocks (the final norm's output for the last), checked.</summary>
    private void Checked(int layer, float[] state, int[] starts, int[] lengths, int total) =>
        NonFiniteValueException.Check(state.AsSpan(0, total * config.Width), config.Width, string.Create(System.Globalization.CultureInfo.InvariantCulture, $"layer {layer}"), starts, lengths, modelFolder);

    private static void Keep(int layer, float[] state, int length, HashSet<int> wanted, Dictionary<int, float[]> hidden)
    {
        if (wanted.Contains(layer))
        {
            hidden[layer] = state.AsSpan(0, length).ToArray();
        }
    }
}
