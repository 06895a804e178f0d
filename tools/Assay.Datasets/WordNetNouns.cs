using System.Globalization;
using System.Security.Cryptography;
using System.Text;

namespace Assay.Datasets;

/// <summary>One noun synset of WordNet 3.0: its offset in data.noun, its supersense (lexicographer file) and its definition.</summary>
internal sealed record NounSynset(string Offset, string Supersense, string FirstWord, string Definition);

/// <summary>
/// Reads WordNet 3.0's data.noun (package wordnet-base). Format (wndb(5WN)): one synset per line,
/// <c>offset lex_filenum ss_type w_cnt word lex_id … p_cnt pointers… | gloss</c>; the licence header lines start with
/// two spaces; lex_filenum is 2-digit decimal, w_cnt and lex_id hexadecimal, p_cnt 3-digit decimal. The definition
/// is the gloss up to the first <c>; "</c> (the rest are quoted examples).
/// </summary>
internal static class WordNetNouns
{
    public const string DefaultPath = "/usr/share/wordnet/data.noun";

    /// <summary>
    /// Lexicographer file numbers 03–28, the noun supersenses, as fixed in the WordNet manual page lexnames(5WN)
    /// (the table is not shipped in the package).
    /// </summary>
    private static readonly string[] NounFiles =
    [
        "Tops", "act", "animal", "artifact", "attribute", "body", "cognition", "communication", "event", "feeling", "food",
        "group", "location", "motive", "object", "person", "phenomenon", "plant", "possession", "process", "quantity",
        "relation", "shape", "state", "substance", "time",
    ];

    public static IEnumerable<NounSynset> Read(string path = DefaultPath)
    {
        if (!File.Exists(path))
        {
            throw new FileNotFoundException($"{path}: not found; WordNet comes from Debian: apt-get install wordnet-base", path);
        }
        int lineNumber = 0;
        foreach (string line in File.ReadLines(path, Encoding.UTF8))
        {
            lineNumber++;
            if (line.StartsWith("  ", StringComparison.Ordinal) || line.Length == 0)
            {
                continue;
            }
            yield return Parse(line, path, lineNumber);
        }
    }

    private static NounSynset Parse(string line, string path, int lineNumber)
    {
        int bar = line.IndexOf(" | ", StringComparison.Ordinal);
        if (bar < 0)
        {
            throw new InvalidDataException($"{path}, line {lineNumber}: no \" | \" before the gloss");
        }
        string[] f = line[..bar].Split(' ', StringSplitOptions.RemoveEmptyEntries);
        int lexFile = int.Parse(f[1], CultureInfo.InvariantCulture);
        if (f[2] != "n" || lexFile is < 3 or > 28)
        {
            throw new InvalidDataException($"{path}, line {lineNumber}: synset type {f[2]} / lexicographer file {lexFile} is not a noun supersense");
        }
        int words = int.Parse(f[3], NumberStyles.HexNumber, CultureInfo.InvariantCulture);
        string first = f[4].Replace('_', ' ');
        if (f.Length < 4 + (2 * words) + 1)
        {
            throw new InvalidDataException($"{path}, line {lineNumber}: {words} words announced, fewer present");
        }
        string gloss = line[(bar + 3)..].TrimEnd();
        int examples = gloss.IndexOf("; \"", StringComparison.Ordinal);
        string definition = (examples >= 0 ? gloss[..examples] : gloss).Trim();
        return new NounSynset(f[0], NounFiles[lexFile - 3], first, definition);
    }

    /// <summary>
    /// The fixed split of synsets into halves: the first byte of SHA-256("wordnet-3.0/noun/" + offset) even puts a
    /// synset in the training-text half (its gloss may be used to train a model), odd in the evaluation half (only
    /// for labelled tasks). Within the evaluation half, the second byte below 52 (≈ 20 %) marks the test split.
    /// </summary>
    public static (bool Evaluation, bool Test) Split(string offset)
    {
        byte[] h = SHA256.HashData(Encoding.ASCII.GetBytes("wordnet-3.0/noun/" + offset));
        return ((h[0] & 1) == 1, h[1] < 52);
    }
}
