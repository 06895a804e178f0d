using System.Numerics;
using System.Numerics.Tensors;
using System.Runtime.CompilerServices;
using System.Runtime.InteropServices;

namespace Assay.Kernels;

internal static partial class CpuKernels
{
    /// <summary>
    /// softmax(x) in place: exp(x − max x) / Σ exp(x − max x), in the precision of <typeparamref name="T"/> (float32 for
    /// attention and the output head, float64 for the probes). Subtracting the maximum first keeps exp from
    /// overflowing (TensorPrimitives.SoftMax does not, and returns NaN for large logits); the float32 sum is in a
    /// fixed order on every CPU.
    /// </summary>
    public static void SoftmaxInPlace<T>(Span<T> x) where T : IFloatingPointIeee754<T>
    {
        if (x.IsEmpty)
        {
            return;
        }
        T max = TensorPrimitives.Max<T>(x);
        TensorPrimitives.Subtract(x, max, x);
        TensorPrimitives.Exp<T>(x, x);
        T sum = Sum(x);
        TensorPrimitives.Multiply(x, T.One / sum, x);
    }

    /// <summary>
    /// log softmax(x)[index] = x[index] − max x − ln Σ exp(x − max x), in the precision of <typeparamref name="T"/>;
    /// x is overwritten with exp(x − max x).
    /// </summary>
    public static T LogSoftmaxAt<T>(Span<T> x, int index) where T : IFloatingPointIeee754<T>
    {
        T max = TensorPrimitives.Max<T>(x);
        T target = x[index];
        TensorPrimitives.Subtract(x, max, x);
        TensorPrimitives.Exp<T>(x, x);
        return target - max - T.Log(Sum(x));
    }

    /// <summary>Σ x: in float32 in the fixed order of <see cref="LaneSum(ReadOnlySpan{float})"/>; in float64 the library's.</summary>
    private static T Sum<T>(Span<T> x) where T : IFloatingPointIeee754<T> =>
        typeof(T) == typeof(float)
            ? T.CreateTruncating(LaneSum(MemoryMarshal.CreateReadOnlySpan(ref Unsafe.As<T, float>(ref MemoryMarshal.GetReference(x)), x.Length)))
            : TensorPrimitives.Sum<T>(x);
}
