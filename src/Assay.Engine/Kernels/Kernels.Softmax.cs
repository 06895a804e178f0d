using System.Numerics.Tensors;

namespace Assay.Kernels;

internal static partial class Kernels
{
    /// <summary>
    /// softmax(x) in place: exp(x − max x) / Σ exp(x − max x). Subtracting the maximum first keeps exp from
    /// overflowing (TensorPrimitives.SoftMax does not, and returns NaN for large logits).
    /// </summary>
    public static void SoftmaxInPlace(Span<float> x)
    {
        if (x.IsEmpty)
        {
            return;
        }
        float max = TensorPrimitives.Max(x);
        TensorPrimitives.Subtract(x, max, x);
        TensorPrimitives.Exp(x, x);
        float sum = TensorPrimitives.Sum(x);
        TensorPrimitives.Multiply(x, 1f / sum, x);
    }
}
