using Assay.Kernels;

namespace Assay.Model.Blocks;

/// <summary>Causal self-attention over a batch, from fused [q | k | v] rows (grouped-query when the shape has fewer key/value heads).</summary>
internal static class CausalSelfAttention
{
    /// <summary>
    /// For each sequence and key/value head, in parallel: the query heads of that group attend over the sequence
    /// (<see cref="CpuKernels.CausalAttentionGroup"/>). When there are fewer (sequence, head) pairs than twice the
    /// workers, each is cut into ranges of query blocks of about equal causal cost, so one long sequence still keeps
    /// every core busy. <paramref name="qkv"/> holds T rows of <see cref="AttentionShape.RowWidth"/>;
    /// <paramref name="output"/> T rows of heads · headWidth.
    /// </summary>
    public static void Run(float[] qkv, float[] output, AttentionShape shape, ForwardBatch batch)
    {
        int stride = shape.RowWidth, outWidth = shape.Heads * shape.HeadWidth, kvHeads = shape.KeyValueHeads;
        int[] starts = batch.Starts, lengths = batch.Lengths;
        int pairs = lengths.Length * kvHeads;
        int workers = batch.Parallel.MaxDegreeOfParallelism > 0 ? batch.Parallel.MaxDegreeOfParallelism : Environment.ProcessorCount;
        int parts = Math.Max(1, ((2 * workers) + pairs - 1) / pairs);
        var items = new List<(int Sequence, int KvHead, int FirstBlock, int EndBlock)>();
        for (int s = 0; s < lengths.Length; s++)
        {
            int blocks = AttentionScratch.BlocksFor(shape, lengths[s]);
            int cuts = Math.Min(parts, blocks);
            for (int c = 0; c < cuts; c++)
            {
                // Block b costs about b + 1/2 (causal), so the first i/cuts of the cost ends near blocks·√(i/cuts).
                int b0 = Cut(blocks, cuts, c), b1 = Cut(blocks, cuts, c + 1);
                for (int kv = 0; b1 > b0 && kv < kvHeads; kv++)
                {
                    items.Add((s, kv, b0, b1));
                }
            }
        }
        KernelVariant variant = batch.Variant;
        Parallel.For(0, items.Count, batch.Parallel, () => batch.RentAttentionScratch(shape), (i, _, scratch) =>
        {
            (int s, int kvHead, int b0, int b1) = items[i];
            int start = starts[s], length = lengths[s];
            CpuKernels.CausalAttentionGroup(qkv.AsSpan(start * stride, length * stride), output.AsSpan(start * outWidth, length * outWidth),
                length, shape, kvHead, b0, b1, scratch, variant);
            return scratch;
        }, batch.ReturnAttentionScratch);
    }

    private static int Cut(int blocks, int cuts, int i) =>
        i == cuts ? blocks : (int)Math.Round(blocks * Math.Sqrt((double)i / cuts));
}
