namespace Assay.Tokenization;

/// <summary>A tokenizer file (vocab.json, merges.txt or a JSON tokenizer definition) is missing, malformed, or
/// disagrees with the model.</summary>
public sealed class TokenizerFileException : InvalidInputException
{
    internal TokenizerFileException(string filePath, string problem, Exception? inner = null)
        : base(filePath, $"{filePath}: {problem}", inner)
    {
    }
}
