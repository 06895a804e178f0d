using System.Text;
using System.Text.Json;
using Assay.Tests.Model;
using Assay.Tokenization;
using Microsoft.ML.Tokenizers;

namespace Assay.Tests.Tokenization;

/// <summary>
/// Tokenization in time linear in the text: pre-tokens go to the BPE encoder in runs of at most 4,096 characters (the
/// same ids as one call, checked against Microsoft.ML.Tokenizers' own whole-text encoding), and a pre-token over
/// 256 characters in pieces, so a 1 MiB line without a split point costs a bounded amount of merge work.
/// </summary>
public sealed class BoundedTokenizationTests
{
    private static readonly Tokenizer Library = TiktokenTokenizer.CreateForModel("gpt2");

    private static string[] Definitions() =>
        [.. File.ReadLines(Path.Combine(Path.GetDirectoryName(WeightsManifestPinTests.RepositoryManifest())!, "src", "Assay.Cli", "tasks", "wordnet-supersense", "test.jsonl"))
            .Take(3000).Select(l => JsonDocument.Parse(l).RootElement.GetProperty("text").GetString()!)];

    [Fact]
    public void Runs_of_whole_pre_tokens_give_the_ids_of_one_call()
    {
        TextTokenizer t = TextTokenizer.EmbeddedGpt2();
        string[] texts = Definitions();
        foreach (string text in texts)
        {
            Assert.Equal(Library.EncodeToIds(text), t.Encode(text));
        }
        // Long texts are cut into runs: 3,000 definitions joined (about 200,000 characters, 50 runs or more), with
        // runs of spaces, newlines and tabs between them (the whitespace rule looks ahead), and pre-tokens of up to
        // 256 characters.
        var joined = new StringBuilder();
        for (int i = 0; i < texts.Length; i++)
        {
            joined.Append(texts[i]).Append((i % 5) switch { 0 => " ", 1 => "  ", 2 => "\n\n   ", 3 => "\t", _ => "'s " });
            if (i % 500 == 0)
            {
                // " " + 255 letters is a 256-character pre-token, the longest encoded in one piece.
                joined.Append(new string('x', 255)).Append(' ').Append(new string('7', 200)).Append(new string(' ', 250)).Append("end");
            }
        }
        string all = joined.ToString();
        Assert.True(all.Length > 50 * 4096);
        Assert.Equal(Library.EncodeToIds(all), t.Encode(all));
        Assert.Equal(all, t.Decode(t.Encode(all)));
    }

    [Fact]
    public void A_one_mebibyte_line_without_a_split_point_costs_linear_work()
    {
        TextTokenizer t = TextTokenizer.EmbeddedGpt2();
        string line = string.Concat(Enumerable.Repeat("qzxv", 1 << 18));   // 1 MiB of letters: one pre-token
        long before = t.Work;
        int[] ids = t.Encode(line);
        long work = t.Work - before;
        // One call on the whole line would be (2^20)^2 ≈ 1.1e12; in 256-character pieces it is 2^20 · 256 ≈ 2.7e8.
        Assert.Equal((long)line.Length * TextTokenizer.MaxPieceChars, work);
        Assert.Equal(line, t.Decode(ids));
        // A surrogate pair is never cut: 1 MiB of one emoji decodes back whole.
        string emoji = string.Concat(Enumerable.Repeat("🙂", 1 << 17));
        Assert.Equal(emoji, t.Decode(t.Encode(emoji)));
    }
}
