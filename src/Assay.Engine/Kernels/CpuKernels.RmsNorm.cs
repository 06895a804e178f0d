using System.Numerics.Tensors;

namespace Assay.Kernels;

internal static partial class CpuKernels
{
    /// <summary>
    /// Row-wise RMSNorm over <paramref name="rows"/> rows of width n = gamma.Length, in float32:
    /// y = x · (1 / √(mean(x²) + ε)) · γ (no centring, no bias), Σ x² in <see cref="LaneSum(ReadOnlySpan{float}, bool, KernelVariant)"/>'s
    /// fixed order. x and y may be the same buffer.
    /// </summary>
    public static void RmsNorm(ReadOnlySpan<float> x, Span<float> y, int rows, ReadOnlySpan<float> gamma, float epsilon)
    {
        int n = gamma.Length;
        for (int r = 0; r < rows; r++)
        {
            ReadOnlySpan<float> xr = x.Slice(r * n, n);
            Span<float> yr = y.Slice(r * n, n);
            float scale = 1f / MathF.Sqrt((LaneSumOfSquares(xr) / n) + epsilon);
            TensorPrimitives.Multiply(xr, scale, yr);
            TensorPrimitives.Multiply(yr, gamma, yr);
        }
    }
}
