using System.Numerics.Tensors;

namespace Assay.Kernels;

internal static partial class CpuKernels
{
    /// <summary>
    /// Row-wise LayerNorm over <paramref name="rows"/> rows of width n = gamma.Length:
    /// y = (x − mean) / √(var + ε) · γ + β, with the biased variance mean((x − mean)²) computed in a second pass
    /// over the centred values (no E[x²] − E[x]² cancellation), both sums in <see cref="LaneSum(ReadOnlySpan{float}, bool, KernelVariant)"/>'s
    /// fixed order. x and y may be the same buffer.
    /// </summary>
    public static void LayerNorm(ReadOnlySpan<float> x, Span<float> y, int rows, ReadOnlySpan<float> gamma,
        ReadOnlySpan<float> beta, float epsilon)
    {
        int n = gamma.Length;
        for (int r = 0; r < rows; r++)
        {
            ReadOnlySpan<float> xr = x.Slice(r * n, n);
            Span<float> yr = y.Slice(r * n, n);
            float mean = LaneSum(xr) / n;
            TensorPrimitives.Subtract(xr, mean, yr);
            float variance = LaneSumOfSquares(yr) / n;
            float scale = 1f / MathF.Sqrt(variance + epsilon);
            TensorPrimitives.Multiply(yr, scale, yr);
            TensorPrimitives.FusedMultiplyAdd(yr, gamma, beta, yr);
        }
    }
}
