using System.Text;
using Assay.Features;

namespace Assay.Cli.Commands;

/// <summary>
/// The <c>--features</c> option of <c>assay extract</c>: the engine's feature list (<see cref="FeatureSpec"/>), whose
/// word and completion lists come from the <c>--words</c> and <c>--completions</c> files (one item per line).
/// </summary>
internal static class FeatureOption
{
    public static IReadOnlyList<FeatureRequest> Parse(string list, int layers, string? wordsFile, string? completionsFile)
    {
        bool wordsRead = false, completionsRead = false;
        ArgumentException? listError = null;
        IReadOnlyList<string> Lists(string name)
        {
            try
            {
                if (name == WordListFeature.ListName)
                {
                    wordsRead = true;
                    return ReadList(wordsFile, "--words", "words or words-loglik");
                }
                completionsRead = true;
                return ReadList(completionsFile, "--completions", "completions");
            }
            catch (ArgumentException e)
            {
                // It names its option already: passed on as it is, without the --features prefix.
                listError = e;
                throw;
            }
        }
        IReadOnlyList<FeatureRequest> requests;
        try
        {
            requests = FeatureSpec.Parse(list, layers, Lists);
        }
        catch (ArgumentException e) when (!ReferenceEquals(e, listError))
        {
            throw new ArgumentException($"--features: {e.Message}", e);
        }
        if (wordsFile != null && !wordsRead)
        {
            throw new ArgumentException("--words is given but no feature reads it; add words or words-loglik to --features");
        }
        if (completionsFile != null && !completionsRead)
        {
            throw new ArgumentException("--completions is given but no feature reads it; add completions to --features");
        }
        return requests;
    }

    /// <summary>One item per non-blank line of a UTF-8 file, kept as written (no trimming but of the line break).</summary>
    private static string[] ReadList(string? path, string option, string kinds)
    {
        if (path == null)
        {
            throw new ArgumentException($"--features: {kinds} needs {option} FILE (one item per line)");
        }
        if (!File.Exists(path))
        {
            throw new FileNotFoundException($"{option} {path}: no such file", path);
        }
        string text;
        try
        {
            text = new UTF8Encoding(false, throwOnInvalidBytes: true).GetString(InputFile.ReadAllBytes(path));
        }
        catch (DecoderFallbackException)
        {
            throw new ArgumentException($"{option} {path}: not valid UTF-8");
        }
        string[] items = text.Split('\n').Select(l => l.TrimEnd('\r')).Where(l => l.Trim().Length > 0).ToArray();
        return items.Length > 0 ? items : throw new ArgumentException($"{option} {path}: no items (one per line)");
    }
}
