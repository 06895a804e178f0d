namespace Assay.Model;

/// <summary>
/// A model that would not fit: the estimated memory of the chosen weight storage and token budget exceeds what the
/// machine has available, so it is refused before anything is loaded rather than killed halfway.
/// </summary>
public sealed class ModelMemoryException : InvalidInputException
{
    internal ModelMemoryException(string filePath, string message, long neededBytes, long availableBytes)
        : base(filePath, message)
    {
        NeededBytes = neededBytes;
        AvailableBytes = availableBytes;
    }

    /// <summary>The estimate: weights plus activations.</summary>
    public long NeededBytes { get; }

    /// <summary>The memory the machine had available.</summary>
    public long AvailableBytes { get; }
}
