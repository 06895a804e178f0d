using System.Collections.Concurrent;
using Assay.Kernels;

namespace Assay.Model.Blocks;

/// <summary>
/// The ragged batch a forward pass runs: the T tokens of all sequences laid end to end (sequence s holds rows
/// Starts[s] … Starts[s] + Lengths[s] − 1 of every [T, ·] activation), and the kernel path and workers it runs on.
/// </summary>
internal sealed class ForwardBatch(int[] starts, int[] lengths, int total, KernelVariant variant, ParallelOptions parallel)
{
    /// <summary>Rows a worker takes at a time in the row-wise steps (norms, activations).</summary>
    private const int RowBlock = 32;

    private readonly ConcurrentBag<AttentionScratch> _attentionScratch = [];

    public int[] Starts { get; } = starts;

    public int[] Lengths { get; } = lengths;

    /// <summary>T, the tokens of the batch.</summary>
    public int Total { get; } = total;

    public KernelVariant Variant { get; } = variant;

    public ParallelOptions Parallel { get; } = parallel;

    /// <summary>
    /// Attention scratch for <paramref name="shape"/> sized for the batch's longest sequence: one a worker returned
    /// earlier in this forward pass, or a new one. Every layer of a model has the same shape, so a pass allocates one per
    /// concurrent worker.
    /// </summary>
    public AttentionScratch RentAttentionScratch(AttentionShape shape)
    {
        int longest = Lengths.Max();
        while (_attentionScratch.TryTake(out AttentionScratch? scratch))
        {
            if (scratch.Fits(shape, longest))
            {
                return scratch;
            }
        }
        return new AttentionScratch(shape, longest);
    }

    /// <summary>Gives back scratch from <see cref="RentAttentionScratch"/> for the next worker or layer.</summary>
    public void ReturnAttentionScratch(AttentionScratch scratch) => _attentionScratch.Add(scratch);

    /// <summary>Runs <paramref name="body"/>(first, count) over blocks of rows on the workers; a row's result is its own, so blocks do not change bits.</summary>
    public void ForRowBlocks(int rows, Action<int, int> body)
    {
        int blocks = (rows + RowBlock - 1) / RowBlock;
        if (blocks <= 1)
        {
            body(0, rows);
            return;
        }
        System.Threading.Tasks.Parallel.For(0, blocks, Parallel, i => body(i * RowBlock, Math.Min(RowBlock, rows - (i * RowBlock))));
    }
}
