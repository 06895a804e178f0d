using System.Globalization;
using System.Text;
using Assay.Features;

namespace Assay.Cli.Commands;

/// <summary>
/// The <c>--features</c> list of <c>assay extract</c>: comma-separated kinds.
/// <list type="bullet">
/// <item><c>hidden[:LAYER|all][:last|mean|mark]</c> — hidden state of a layer (default the last, L; negative counts from the end), pooled;</item>
/// <item><c>nextword</c> — the full next-word distribution; <c>topk:K</c> — its K most likely ids and probabilities;</item>
/// <item><c>words</c>, <c>words-loglik</c> — first-token probability (and full log-likelihood) of each word of <c>--words</c>;</item>
/// <item><c>cmean</c> — the conditional-mean feature Φp; <c>completions</c> — log-likelihood of each line of <c>--completions</c>.</item>
/// </list>
/// </summary>
internal static class FeatureSpecs
{
    public const string Default = "hidden,cmean";

    public static IReadOnlyList<FeatureRequest> Parse(string list, int layers, string? wordsFile, string? completionsFile)
    {
        var result = new List<FeatureRequest>();
        IReadOnlyList<string>? words = null, completions = null;
        foreach (string raw in list.Split(',', StringSplitOptions.TrimEntries | StringSplitOptions.RemoveEmptyEntries))
        {
            string[] parts = raw.Split(':');
            switch (parts[0])
            {
                case "hidden":
                    result.AddRange(Hidden(raw, parts, layers));
                    break;
                case "nextword" when parts.Length == 1:
                    result.Add(new NextWordFeature());
                    break;
                case "topk" when parts.Length == 2:
                    result.Add(new TopTokensFeature(Number(raw, parts[1])));
                    break;
                case "cmean" when parts.Length == 1:
                    result.Add(new ConditionalMeanFeature());
                    break;
                case "words" or "words-loglik" when parts.Length == 1:
                    words ??= ReadList(wordsFile, "--words", raw);
                    result.Add(new WordListFeature(words, FullLogLikelihood: parts[0] == "words-loglik"));
                    break;
                case "completions" when parts.Length == 1:
                    completions ??= ReadList(completionsFile, "--completions", raw);
                    result.Add(new CompletionFeature(completions));
                    break;
                default:
                    throw new ArgumentException(
                        $"--features: unknown feature \"{raw}\"; the kinds are hidden[:LAYER|all][:last|mean|mark], nextword, topk:K, words, words-loglik, cmean, completions");
            }
        }
        if (result.Count == 0)
        {
            throw new ArgumentException("--features: the list is empty");
        }
        if (wordsFile != null && words == null)
        {
            throw new ArgumentException("--words is given but no feature reads it; add words or words-loglik to --features");
        }
        if (completionsFile != null && completions == null)
        {
            throw new ArgumentException("--completions is given but no feature reads it; add completions to --features");
        }
        return result;
    }

    private static IEnumerable<FeatureRequest> Hidden(string raw, string[] parts, int layers)
    {
        if (parts.Length > 3)
        {
            throw new ArgumentException($"--features: \"{raw}\" has too many parts; write hidden:LAYER:POOLING");
        }
        HiddenPooling pooling = parts.Length < 3 ? HiddenPooling.LastToken : parts[2] switch
        {
            "last" => HiddenPooling.LastToken,
            "mean" => HiddenPooling.Mean,
            "mark" => HiddenPooling.Marked,
            _ => throw new ArgumentException($"--features: \"{raw}\": pooling \"{parts[2]}\" is not last, mean or mark"),
        };
        if (parts.Length >= 2 && parts[1] == "all")
        {
            return Enumerable.Range(0, layers + 1).Select(l => new HiddenStateFeature(l, pooling));
        }
        int layer = parts.Length >= 2 && parts[1].Length > 0 ? Integer(raw, parts[1]) : -1;
        return [new HiddenStateFeature(layer, pooling)];
    }

    private static int Number(string raw, string text)
    {
        int n = Integer(raw, text);
        return n >= 1 ? n : throw new ArgumentException($"--features: \"{raw}\": expected a positive number, found {text}");
    }

    private static int Integer(string raw, string text) =>
        int.TryParse(text, NumberStyles.AllowLeadingSign, CultureInfo.InvariantCulture, out int n)
            ? n
            : throw new ArgumentException($"--features: \"{raw}\": \"{text}\" is not a whole number");

    /// <summary>One item per non-blank line of a UTF-8 file, kept as written (no trimming but of the line break).</summary>
    private static string[] ReadList(string? path, string option, string feature)
    {
        if (path == null)
        {
            throw new ArgumentException($"--features: {feature} needs {option} FILE (one item per line)");
        }
        if (!File.Exists(path))
        {
            throw new FileNotFoundException($"{option} {path}: no such file", path);
        }
        string text;
        try
        {
            text = new UTF8Encoding(false, throwOnInvalidBytes: true).GetString(File.ReadAllBytes(path));
        }
        catch (DecoderFallbackException)
        {
            throw new ArgumentException($"{option} {path}: not valid UTF-8");
        }
        string[] items = text.Split('\n').Select(l => l.TrimEnd('\r')).Where(l => l.Trim().Length > 0).ToArray();
        if (items.Length == 0)
        {
            throw new ArgumentException($"{option} {path}: no items (one per line)");
        }
        return items;
    }
}
