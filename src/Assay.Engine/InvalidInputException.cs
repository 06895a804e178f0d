namespace Assay;

/// <summary>
/// Base of the engine's domain exceptions: something read from outside (a weights file, a config, a tokenizer file,
/// a text input) is not what it must be. <see cref="Exception.Message"/> names the file and, where there is one, the
/// tensor, field or line, with what was expected and what was found.
/// </summary>
public abstract class InvalidInputException : Exception
{
    private protected InvalidInputException(string filePath, string message, Exception? inner = null)
        : base(message, inner)
    {
        FilePath = filePath;
    }

    /// <summary>The file the bad input came from.</summary>
    public string FilePath { get; }
}
