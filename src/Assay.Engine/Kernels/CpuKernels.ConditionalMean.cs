using System.Buffers;
using System.Diagnostics;
using System.Runtime.Intrinsics;

namespace Assay.Kernels;

internal static partial class CpuKernels
{
    /// <summary>Rows of B that one parallel work item covers.</summary>
    private const int ConditionalMeanRowsPerTask = 16;

    /// <summary>
    /// The probability-weighted average of B's columns: out[r, k] = Σ_n B[k, n] · p[r, n] for each of
    /// <paramref name="rows"/> weight rows p (N values each, row-major). With B the output head packed as Eᵀ (d × V)
    /// and p a next-word distribution this is the conditional-mean feature Φp = Σ_v p_v·E_v. Each output is summed in
    /// 64 lanes (lane j takes columns j, j + 64, …, one fused multiply-add per panel in panel order) and the lanes are
    /// then added in order, so every kernel path gives the same bits and the thread count changes nothing.
    /// </summary>
    public static void ConditionalMean(ReadOnlySpan<float> p, int rows, PackedMatrix b, Span<float> output,
        KernelVariant variant, ParallelOptions? parallel = null)
    {
        const int W = PackedMatrix.PanelWidth;
        int k = b.Rows, n = b.Columns, panels = b.Panels;
        Debug.Assert(p.Length >= (long)rows * n && output.Length >= (long)rows * k);
        if (rows == 0)
        {
            return;
        }

        // Weight rows padded to whole panels, so the padded columns of B meet zeros (pooled buffers: a long run
        // calls this once per batch).
        float[] padded = ArrayPool<float>.Shared.Rent(rows * panels * W);
        float[] result = ArrayPool<float>.Shared.Rent(rows * k);
        try
        {
            Sum(p, rows, b, variant, parallel, padded, result);
            result.AsSpan(0, rows * k).CopyTo(output);
        }
        finally
        {
            ArrayPool<float>.Shared.Return(padded);
            ArrayPool<float>.Shared.Return(result);
        }
    }

    private static void Sum(ReadOnlySpan<float> p, int rows, PackedMatrix b, KernelVariant variant, ParallelOptions? parallel,
        float[] padded, float[] result)
    {
        const int W = PackedMatrix.PanelWidth;
        int k = b.Rows, n = b.Columns, panels = b.Panels;
        padded.AsSpan(0, rows * panels * W).Clear();
        for (int r = 0; r < rows; r++)
        {
            p.Slice(r * n, n).CopyTo(padded.AsSpan(r * panels * W, n));
        }
        float[]? data = b.Data;
        int tasks = (k + ConditionalMeanRowsPerTask - 1) / ConditionalMeanRowsPerTask;
        Parallel.For(0, tasks, parallel ?? DefaultParallelism, () => new float[(rows + 1) * W], (task, _, state) =>
        {
            // The first rows·W floats are the lanes; the last W hold a bfloat16 panel row widened.
            Span<float> lanes = state.AsSpan(0, rows * W), widened = state.AsSpan(rows * W, W);
            int k0 = task * ConditionalMeanRowsPerTask;
            int k1 = Math.Min(k, k0 + ConditionalMeanRowsPerTask);
            for (int kk = k0; kk < k1; kk++)
            {
                lanes.Clear();
                for (int panel = 0; panel < panels; panel++)
                {
                    ReadOnlySpan<float> bRow;
                    if (data != null)
                    {
                        bRow = data.AsSpan((panel * k * W) + (kk * W), W);
                    }
                    else
                    {
                        b.CopyPanelRow(panel, kk, widened);
                        bRow = widened;
                    }
                    for (int r = 0; r < rows; r++)
                    {
                        MultiplyAddInPlace(bRow, padded.AsSpan((r * panels * W) + (panel * W), W), lanes.Slice(r * W, W), variant);
                    }
                }
                for (int r = 0; r < rows; r++)
                {
                    float sum = 0f;
                    for (int j = 0; j < W; j++)
                    {
                        sum += lanes[(r * W) + j];
                    }
                    result[((long)r * k) + kk] = sum;
                }
            }
            return state;
        }, static _ => { });
    }
}
