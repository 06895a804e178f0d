using System.Globalization;

namespace Assay.Input;

/// <summary>An input file is unusable as a whole (a header without the text column), or a record was bad under --strict.</summary>
public sealed class TextInputException : InvalidInputException
{
    /// <summary>Creates the exception; <paramref name="line"/> is 0 when the problem is not on one line.</summary>
    public TextInputException(string filePath, long line, string problem)
        : base(filePath, line > 0 ? string.Create(CultureInfo.InvariantCulture, $"{filePath}, line {line}: {problem}") : $"{filePath}: {problem}")
    {
        Line = line;
    }

    /// <summary>The 1-based line, or 0.</summary>
    public long Line { get; }
}
