using Assay.Kernels;

namespace Assay.Model.Blocks;

/// <summary>Causal multi-head self-attention over a batch, from fused [q | k | v] rows.</summary>
internal static class CausalSelfAttention
{
    /// <summary>
    /// For each sequence and head, in parallel: output rows (T × d) = softmax(q·kᵀ / √hd, causal) · v, where
    /// <paramref name="qkv"/> holds T rows of [q | k | v], each third d = heads · headWidth wide.
    /// </summary>
    public static void Run(float[] qkv, float[] output, int heads, int headWidth, ForwardBatch batch)
    {
        int d = heads * headWidth;
        int[] starts = batch.Starts, lengths = batch.Lengths;
        int work = lengths.Length * heads;
        int longest = lengths.Max();
        KernelVariant variant = batch.Variant;
        Parallel.For(0, work, batch.Parallel, () => new float[longest * (headWidth + 1)], (i, _, scratch) =>
        {
            int s = i / heads, head = i % heads;
            int start = starts[s], length = lengths[s];
            CpuKernels.CausalAttentionHead(qkv.AsSpan(start * 3 * d, length * 3 * d), output.AsSpan(start * d, length * d),
                length, d, head, headWidth, scratch.AsSpan(0, longest), scratch.AsSpan(longest), variant);
            return scratch;
        }, static _ => { });
    }
}
