using Assay.Kernels;

namespace Assay.Model.Blocks;

/// <summary>Causal self-attention over a batch, from fused [q | k | v] rows (grouped-query when the shape has fewer key/value heads).</summary>
internal static class CausalSelfAttention
{
    /// <summary>
    /// For each sequence and key/value head, in parallel: the query heads of that group attend over the sequence
    /// (<see cref="CpuKernels.CausalAttentionGroup"/>), each key head transposed once for its group. <paramref name="qkv"/>
    /// holds T rows of <see cref="AttentionShape.RowWidth"/>; <paramref name="output"/> T rows of heads · headWidth.
    /// </summary>
    public static void Run(float[] qkv, float[] output, AttentionShape shape, ForwardBatch batch)
    {
        int stride = shape.RowWidth, outWidth = shape.Heads * shape.HeadWidth, kvHeads = shape.KeyValueHeads;
        int[] starts = batch.Starts, lengths = batch.Lengths;
        int work = lengths.Length * kvHeads;
        int longest = lengths.Max();
        int hd = shape.HeadWidth;
        KernelVariant variant = batch.Variant;
        Parallel.For(0, work, batch.Parallel, () => new float[longest * (hd + 1)], (i, _, scratch) =>
        {
            int s = i / kvHeads, kvHead = i % kvHeads;
            int start = starts[s], length = lengths[s];
            CpuKernels.CausalAttentionGroup(qkv.AsSpan(start * stride, length * stride), output.AsSpan(start * outWidth, length * outWidth),
                length, shape, kvHead, scratch.AsSpan(0, longest), scratch.AsSpan(longest), variant);
            return scratch;
        }, static _ => { });
    }
}
