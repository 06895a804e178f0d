namespace Assay.Kernels;

internal static partial class CpuKernels
{
    /// <summary>
    /// Rotates one head's first r = 2·cos.Length dimensions in the half-split convention, in place: for i &lt; r/2,
    /// (x_i, x_{i+r/2}) ← (x_i·cos_i − x_{i+r/2}·sin_i, x_{i+r/2}·cos_i + x_i·sin_i); dimensions r … of the head are untouched.
    /// Each value is two float32 products and one sum, on every kernel path.
    /// </summary>
    public static void RotateHalfSplit(Span<float> head, ReadOnlySpan<float> cos, ReadOnlySpan<float> sin)
    {
        int half = cos.Length;
        Span<float> a = head[..half], b = head.Slice(half, half);
        for (int i = 0; i < half; i++)
        {
            float x = a[i], y = b[i];
            a[i] = (x * cos[i]) - (y * sin[i]);
            b[i] = (y * cos[i]) + (x * sin[i]);
        }
    }
}
