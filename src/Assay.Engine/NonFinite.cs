using System.Numerics.Tensors;

namespace Assay;

/// <summary>Finds NaN and infinities in float32 data: the forward pass's checks and inspect's scan of the weights.</summary>
internal static class NonFinite
{
    /// <summary>The index of the first NaN or infinity in <paramref name="values"/>, or −1.</summary>
    public static int First(ReadOnlySpan<float> values)
    {
        // The vectorized maximum magnitude is NaN or infinite exactly when some value is: the common case costs one pass.
        if (values.IsEmpty || float.IsFinite(TensorPrimitives.MaxMagnitude(values)))
        {
            return -1;
        }
        for (int i = 0; i < values.Length; i++)
        {
            if (!float.IsFinite(values[i]))
            {
                return i;
            }
        }
        return -1;
    }
}
