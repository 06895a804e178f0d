namespace Assay.Config;

/// <summary>A model's config.json is malformed, names an unsupported architecture, or holds a value out of range.</summary>
public sealed class ModelConfigException : InvalidInputException
{
    internal ModelConfigException(string filePath, string? field, string problem, Exception? inner = null)
        : base(filePath, field is null ? $"{filePath}: {problem}" : $"{filePath}: field '{field}': {problem}", inner)
    {
        Field = field;
    }

    /// <summary>The config field at fault, or null when the problem is with the file as a whole.</summary>
    public string? Field { get; }
}
