using System.Buffers.Binary;
using System.Security.Cryptography;
using System.Text;
using System.Text.RegularExpressions;

namespace Assay.Datasets;

/// <summary>One fortune-file entry, its topic (the file name) and its position in the file.</summary>
internal sealed record Fortune(string Topic, int Index, string Text);

/// <summary>
/// Reads the topical fortune files of Debian's fortunes and fortunes-min packages (strfile(1) format: entries separated
/// by a line that is exactly "%"; each file's .dat holds the entry count as a big-endian uint32 at byte 4). Entries are
/// trimmed, empty ones skipped, and attribution lines ("-- Name" ending a paragraph) stripped, since they would give the topic
/// away.
/// </summary>
internal static partial class FortuneTopics
{
    public const string DefaultFolder = "/usr/share/games/fortunes";

    /// <summary>The 17 English files whose names are topics (../shared/DATA.md).</summary>
    public static readonly string[] Topics =
    [
        "art", "computers", "drugs", "education", "food", "kids", "law", "literature", "love", "medicine", "men-women",
        "people", "politics", "science", "songs-poems", "sports", "work",
    ];

    [GeneratedRegex(@"^\s*--\s")]
    private static partial Regex Attribution();

    public static IEnumerable<Fortune> Read(string folder = DefaultFolder)
    {
        foreach (string topic in Topics)
        {
            string path = Path.Combine(folder, topic);
            if (!File.Exists(path))
            {
                throw new FileNotFoundException($"{path}: not found; the fortune files come from Debian: apt-get install fortunes fortunes-min", path);
            }
            int index = 0;
            foreach (string entry in Entries(File.ReadAllText(path, Encoding.UTF8)))
            {
                yield return new Fortune(topic, index++, entry);
            }
        }
    }

    /// <summary>The entry count strfile recorded in a file's .dat (a check on the parse).</summary>
    public static int RecordedCount(string topic, string folder = DefaultFolder) =>
        (int)BinaryPrimitives.ReadUInt32BigEndian(File.ReadAllBytes(Path.Combine(folder, topic + ".dat")).AsSpan(4));

    /// <summary>Raw entries (before trimming and skipping), for comparison with the recorded count.</summary>
    public static int RawEntryCount(string topic, string folder = DefaultFolder) =>
        Split(File.ReadAllText(Path.Combine(folder, topic), Encoding.UTF8)).Count(e => e.Trim().Length > 0);

    /// <summary>Every ≈ 5th entry, by a fixed hash of topic and index, is in the test split.</summary>
    public static bool IsTest(Fortune f) =>
        SHA256.HashData(Encoding.UTF8.GetBytes($"fortunes/{f.Topic}/{f.Index}"))[0] < 52;

    private static IEnumerable<string> Entries(string text)
    {
        foreach (string raw in Split(text))
        {
            var lines = raw.Split('\n').Select(l => l.TrimEnd('\r')).ToList();
            // An attribution is a "-- Name" line, possibly continued by indented lines, at the end of a paragraph:
            // compound entries hold several quotes, each with its own.
            for (int end = lines.Count; end > 0;)
            {
                int start = lines.FindLastIndex(end - 1, end, l => l.Trim().Length == 0) + 1;   // the paragraph [start, end)
                int attribution = lines.FindLastIndex(end - 1, end - start, l => Attribution().IsMatch(l));
                if (attribution > start && lines.Skip(attribution + 1).Take(end - attribution - 1).All(l => char.IsWhiteSpace(l[0])))
                {
                    lines.RemoveRange(attribution, end - attribution);
                }
                end = start - 1;
            }
            string entry = string.Join("\n", lines).Trim();
            if (entry.Length > 0)
            {
                yield return entry;
            }
        }
    }

    private static IEnumerable<string> Split(string text)
    {
        var current = new StringBuilder();
        foreach (string line in text.Split('\n'))
        {
            if (line.TrimEnd('\r') == "%")
            {
                yield return current.ToString();
                current.Clear();
            }
            else
            {
                current.Append(line).Append('\n');
            }
        }
        yield return current.ToString();
    }
}
