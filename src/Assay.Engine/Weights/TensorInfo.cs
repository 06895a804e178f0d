namespace Assay.Weights;

/// <summary>One tensor's entry in a safetensors header.</summary>
/// <param name="Name">The tensor's name in the header.</param>
/// <param name="DType">The element type.</param>
/// <param name="Shape">The dimensions, outermost first; empty for a scalar.</param>
/// <param name="DataBegin">Start of the tensor's bytes, relative to the end of the header.</param>
/// <param name="DataEnd">End (exclusive) of the tensor's bytes, relative to the end of the header.</param>
/// <param name="FilePath">The file that holds it.</param>
public sealed record TensorInfo(string Name, TensorDType DType, IReadOnlyList<long> Shape, long DataBegin, long DataEnd, string FilePath)
{
    /// <summary>The number of elements: the product of <see cref="Shape"/> (1 for a scalar).</summary>
    public long ElementCount
    {
        get
        {
            long n = 1;
            foreach (long d in Shape)
            {
                n *= d;
            }
            return n;
        }
    }

    /// <summary>The number of bytes the tensor occupies.</summary>
    public long ByteLength => DataEnd - DataBegin;

    /// <summary>The shape written as [a, b, …].</summary>
    public string ShapeText => FormatShape(Shape);

    internal static string FormatShape(IReadOnlyList<long> shape) => "[" + string.Join(", ", shape) + "]";
}
