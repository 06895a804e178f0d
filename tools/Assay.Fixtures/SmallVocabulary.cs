using System.Text.Json;

namespace Assay.Fixtures;

/// <summary>
/// A small byte-level BPE vocabulary for small synthetic models: the 256 byte symbols (ids 0–255, in byte order),
/// &lt;|endoftext|&gt; = 256, then a few merges of common English pairs (ids 257…).
/// </summary>
public static class SmallVocabulary
{
    private static readonly string[] MergePairs = ["Ġ t", "h e", "Ġt he", "i n", "Ġ a", "e r", "o n", "Ġ s"];

    /// <summary>Token → id, in id order.</summary>
    public static List<KeyValuePair<string, int>> Vocabulary()
    {
        var vocab = new List<KeyValuePair<string, int>>();
        string[] symbols = ByteLevel.Symbols();
        for (int b = 0; b < 256; b++)
        {
            vocab.Add(new(symbols[b], b));
        }
        vocab.Add(new("<|endoftext|>", 256));
        foreach (string pair in MergePairs)
        {
            vocab.Add(new(pair.Replace(" ", "", StringComparison.Ordinal), vocab.Count));
        }
        return vocab;
    }

    public static IReadOnlyList<string> Merges => MergePairs;

    public static void WriteVocabAndMerges(string folder)
    {
        WriteVocabJson(Path.Combine(folder, "vocab.json"), Vocabulary());
        File.WriteAllLines(Path.Combine(folder, "merges.txt"), ["#version: 0.2", .. MergePairs]);
    }

    public static void WriteDefinition(string folder)
    {
        using var stream = File.Create(Path.Combine(folder, "tokenizer.json"));
        using var json = new Utf8JsonWriter(stream, new JsonWriterOptions { Indented = true });
        json.WriteStartObject();
        json.WriteString("version", "1.0");
        json.WriteStartObject("model");
        json.WriteString("type", "BPE");
        json.WriteStartObject("vocab");
        foreach ((string token, int id) in Vocabulary())
        {
            json.WriteNumber(token, id);
        }
        json.WriteEndObject();
        json.WriteStartArray("merges");
        // One spelling of each kind, as both occur in the wild.
        for (int i = 0; i < MergePairs.Length; i++)
        {
            if (i % 2 == 0)
            {
                json.WriteStringValue(MergePairs[i]);
            }
            else
            {
                string[] parts = MergePairs[i].Split(' ');
                json.WriteStartArray();
                json.WriteStringValue(parts[0]);
                json.WriteStringValue(parts[1]);
                json.WriteEndArray();
            }
        }
        json.WriteEndArray();
        json.WriteEndObject();
        json.WriteEndObject();
    }

    internal static void WriteVocabJson(string path, IEnumerable<KeyValuePair<string, int>> vocab)
    {
        using var stream = File.Create(path);
        using var json = new Utf8JsonWriter(stream, new JsonWriterOptions { Encoder = System.Text.Encodings.Web.JavaScriptEncoder.UnsafeRelaxedJsonEscaping });
        json.WriteStartObject();
        foreach ((string token, int id) in vocab)
        {
            json.WriteNumber(token, id);
        }
        json.WriteEndObject();
    }
}
