namespace Assay.Weights;

/// <summary>A NaN or infinity stored in a tensor.</summary>
/// <param name="Tensor">The tensor.</param>
/// <param name="Index">The element, 0-based in row-major order.</param>
/// <param name="Value">NaN, +∞ or −∞.</param>
public sealed record NonFiniteTensorValue(TensorInfo Tensor, long Index, float Value);
