using System.Globalization;
using System.Text;

namespace Assay.Evaluation;

/// <summary>A verbalizer file is malformed; the message names the line.</summary>
public sealed class VerbalizerException : InvalidInputException
{
    /// <summary>Creates the exception.</summary>
    public VerbalizerException(string filePath, int line, string problem)
        : base(filePath, line > 0 ? string.Create(CultureInfo.InvariantCulture, $"{filePath}, line {line}: {problem}") : $"{filePath}: {problem}")
    {
    }
}

/// <summary>
/// Label words for reading a classification task as sentence completion. The file format: one label per line,
/// <c>label: word, word, …</c> (a word may hold spaces: "living thing"); blank lines and lines starting with # are
/// skipped; UTF-8. A label's score is the summed probability of its words as the continuation.
/// </summary>
public sealed class Verbalizer
{
    private Verbalizer(IReadOnlyList<string> labels, IReadOnlyList<IReadOnlyList<string>> words)
    {
        Labels = labels;
        Words = words;
    }

    /// <summary>The labels, in file order.</summary>
    public IReadOnlyList<string> Labels { get; }

    /// <summary>Each label's words.</summary>
    public IReadOnlyList<IReadOnlyList<string>> Words { get; }

    /// <summary>Every word once, in file order: the word list to extract.</summary>
    public IReadOnlyList<string> AllWords => [.. Words.SelectMany(w => w).Distinct(StringComparer.Ordinal)];

    /// <exception cref="VerbalizerException">Invalid UTF-8, a line without "label:", a label twice, a label without words, or fewer than two labels.</exception>
    public static Verbalizer Load(string path)
    {
        ArgumentNullException.ThrowIfNull(path);
        if (!File.Exists(path))
        {
            throw new VerbalizerException(path, 0, "no such verbalizer file");
        }
        string text;
        try
        {
            text = new UTF8Encoding(false, throwOnInvalidBytes: true).GetString(InputFile.ReadAllBytes(path));
        }
        catch (DecoderFallbackException)
        {
            throw new VerbalizerException(path, 1, "not valid UTF-8");
        }
        var labels = new List<string>();
        var words = new List<IReadOnlyList<string>>();
        string[] lines = text.Split('\n');
        for (int i = 0; i < lines.Length; i++)
        {
            string line = lines[i].TrimEnd('\r');
            if (line.Trim().Length == 0 || line.TrimStart().StartsWith('#'))
            {
                continue;
            }
            int colon = line.IndexOf(':', StringComparison.Ordinal);
            string label = colon < 0 ? "" : line[..colon].Trim();
            if (label.Length == 0)
            {
                throw new VerbalizerException(path, i + 1, "expected \"label: word, word, …\"");
            }
            if (labels.Contains(label))
            {
                throw new VerbalizerException(path, i + 1, $"label \"{label}\" appears twice");
            }
            string[] w = [.. line[(colon + 1)..].Split(',').Select(x => x.Trim()).Where(x => x.Length > 0)];
            if (w.Length == 0)
            {
                throw new VerbalizerException(path, i + 1, $"label \"{label}\" has no words");
            }
            labels.Add(label);
            words.Add(w);
        }
        if (labels.Count < 2)
        {
            throw new VerbalizerException(path, lines.Length, $"{labels.Count} label(s); a classification needs at least two");
        }
        return new Verbalizer(labels, words);
    }

    /// <summary>
    /// Each label's score from one row's word values (in <see cref="AllWords"/> order): the sum of the words'
    /// probabilities, given directly (first-token probabilities) or as log-likelihoods (exponentiated first).
    /// </summary>
    public void Scores(ReadOnlySpan<float> wordValues, bool logLikelihoods, Span<double> scores)
    {
        IReadOnlyList<string> all = AllWords;
        for (int l = 0; l < Labels.Count; l++)
        {
            double s = 0;
            foreach (string w in Words[l])
            {
                double v = wordValues[IndexOf(all, w)];
                s += logLikelihoods ? Math.Exp(v) : v;
            }
            scores[l] = s;
        }
    }

    /// <summary>
    /// The label scores of one row renormalized into a distribution over the labels (file order): what zero-shot
    /// scoring reports and is scored on.
    /// </summary>
    public void Distribution(ReadOnlySpan<float> wordValues, bool logLikelihoods, Span<double> probabilities)
    {
        Scores(wordValues, logLikelihoods, probabilities);
        double sum = 0;
        foreach (double s in probabilities)
        {
            sum += s;
        }
        for (int j = 0; j < probabilities.Length; j++)
        {
            probabilities[j] /= sum;
        }
    }

    private static int IndexOf(IReadOnlyList<string> all, string word)
    {
        for (int i = 0; i < all.Count; i++)
        {
            if (all[i] == word)
            {
                return i;
            }
        }
        return -1;
    }
}
