namespace Assay.Weights;

/// <summary>A safetensors file, a shard index or the tensors they hold do not match the format or the model config.</summary>
public sealed class WeightsFormatException : InvalidInputException
{
    internal WeightsFormatException(string filePath, string? tensorName, string problem, Exception? inner = null)
        : base(filePath, Compose(filePath, tensorName, problem), inner)
    {
        TensorName = tensorName;
    }

    /// <summary>The tensor at fault, or null when the problem is with the file as a whole.</summary>
    public string? TensorName { get; }

    private static string Compose(string filePath, string? tensorName, string problem) =>
        tensorName is null ? $"{filePath}: {problem}" : $"{filePath}: tensor '{Echo.Of(tensorName)}': {problem}";
}
