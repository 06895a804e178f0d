using Assay.Config;
using Assay.Kernels;

namespace Assay.Model.Blocks;

/// <summary>
/// Rotary position embeddings applied to the query and key heads of fused [q | k | v] rows, position p being the row's
/// index within its sequence. cos(p·θ_i) and sin(p·θ_i) are computed in float64 and kept as float32 in a table that
/// grows to the longest sequence seen (shared by all blocks and threads; a table is never changed once published).
/// </summary>
internal sealed class RotaryEmbedding(RotaryPositions positions, int contextLength)
{
    private readonly double[] _frequencies = positions.Frequencies();
    private volatile Table _table = new(0, [], []);

    /// <summary>Rotated pairs per head, r/2.</summary>
    public int Pairs => _frequencies.Length;

    /// <summary>
    /// Rotates the first <paramref name="heads"/> heads (the query heads, then the key heads) of every row of
    /// <paramref name="qkv"/> (rows <paramref name="rowWidth"/> wide, heads <paramref name="headWidth"/> wide).
    /// </summary>
    public void Apply(float[] qkv, int rowWidth, int heads, int headWidth, ForwardBatch batch)
    {
        Table table = For(batch.Lengths.Max());
        int pairs = Pairs;
        int[] starts = batch.Starts, lengths = batch.Lengths;
        batch.ForRowBlocks(batch.Total, (first, count) =>
        {
            // Rows first … first + count − 1 of the batch; each row's position within its sequence.
            int s = Array.BinarySearch(starts, first);
            s = s >= 0 ? s : ~s - 1;
            for (int row = first; row < first + count; row++)
            {
                while (row >= starts[s] + lengths[s])
                {
                    s++;
                }
                int p = row - starts[s];
                ReadOnlySpan<float> cos = table.Cos.AsSpan(p * pairs, pairs), sin = table.Sin.AsSpan(p * pairs, pairs);
                Span<float> r = qkv.AsSpan(row * rowWidth, heads * headWidth);
                for (int h = 0; h < heads; h++)
                {
                    CpuKernels.RotateHalfSplit(r.Slice(h * headWidth, headWidth), cos, sin);
                }
            }
        });
    }

    private Table For(int length)
    {
        Table table = _table;
        if (table.Length >= length)
        {
            return table;
        }
        int n = Math.Min(contextLength, Math.Max(length, 2 * table.Length));
        int pairs = Pairs;
        float[] cos = new float[n * pairs], sin = new float[n * pairs];
        for (int p = 0; p < n; p++)
        {
            for (int i = 0; i < pairs; i++)
            {
                double angle = p * _frequencies[i];
                cos[(p * pairs) + i] = (float)Math.Cos(angle);
                sin[(p * pairs) + i] = (float)Math.Sin(angle);
            }
        }
        table = new Table(n, cos, sin);
        _table = table;
        return table;
    }

    private sealed record Table(int Length, float[] Cos, float[] Sin);
}
