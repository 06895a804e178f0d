using System.Text;
using Assay.Config;
using Assay.Fixtures;
using Assay.Input;
using Assay.Tests.Support;

namespace Assay.Tests.Hardening;

/// <summary>
/// Bad records are rejected one by one and the reading goes on: CSV/TSV records over the 1 MiB cap (at exactly the
/// cap), lone surrogate escapes and keys given twice in a JSON line. A config with a key given twice is refused.
/// </summary>
public sealed class InputRecordTests
{
    private static List<InputRecord> Read(string path) { using TextInputReader r = TextInputReader.Open(path); return [.. r.Records()]; }

    [Theory]
    [InlineData(".csv", ',')]
    [InlineData(".tsv", '\t')]
    public void Delimited_records_over_the_cap_are_rejected_at_exactly_the_cap_and_the_reading_goes_on(string extension, char separator)
    {
        using var temp = new TempFolder();
        string path = temp.File("texts" + extension);
        // Field text of exactly 1,048,576 bytes (id "a" + text) is accepted; one byte more is rejected.
        string atCap = new('x', TextInputReader.MaxRecordBytes - 1), over = new('y', TextInputReader.MaxRecordBytes);
        File.WriteAllText(path, $"id{separator}text\na{separator}{atCap}\nb{separator}{over}\nc{separator}after\n");
        List<InputRecord> records = Read(path);
        Assert.Equal(3, records.Count);
        Assert.True(records[0].Accepted);
        Assert.Equal(atCap, records[0].Text);
        Assert.Equal("record is longer than 1,048,576 bytes (1,048,577 bytes of field text)", records[1].Rejection);
        Assert.Equal(3, records[1].Line);
        Assert.Equal(("c", "after"), (records[2].Id, records[2].Text));
    }

    [Fact]
    public void A_quote_never_closed_stops_the_reading_with_the_line_and_a_reason()
    {
        using var temp = new TempFolder();
        string path = temp.File("texts.csv");
        using (var w = new StreamWriter(path))
        {
            w.Write("text\nfine\n\"never closed ");
            for (int i = 0; i < 70; i++)
            {
                w.Write(new string('z', 1 << 20));
            }
        }
        var e = Assert.Throws<TextInputException>(() => Read(path));
        Assert.Equal(3, e.Line);
        Assert.Contains("a record longer than 67,108,864 bytes (a quote that is never closed?)", e.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void A_lone_surrogate_escape_or_a_key_given_twice_rejects_the_json_line()
    {
        using var temp = new TempFolder();
        string path = temp.File("texts.jsonl");
        File.WriteAllText(path, """
            {"text": "bad \ud800 x"}
            {"text": "a pair \ud83d\ude42 is fine"}
            {"text": "one", "text": "two"}
            {"text": "ok", "label": "\udc00"}
            {"text": "last"}
            """ + "\n");
        List<InputRecord> records = Read(path);
        Assert.Equal(5, records.Count);
        Assert.Equal("field \"text\" holds a lone surrogate escape (a \\uD800–\\uDFFF escape without its pair), which is not text", records[0].Rejection);
        Assert.Equal("a pair 🙂 is fine", records[1].Text);
        Assert.StartsWith("not well-formed JSON (", records[2].Rejection, StringComparison.Ordinal);
        Assert.Contains("Duplicate", records[2].Rejection, StringComparison.OrdinalIgnoreCase);
        Assert.StartsWith("field \"label\" holds a lone surrogate escape", records[3].Rejection, StringComparison.Ordinal);
        Assert.Equal("last", records[4].Text);
    }

    [Fact]
    public void A_config_with_a_key_given_twice_is_refused_naming_the_file()
    {
        using var temp = new TempFolder();
        string path = temp.File("config.json");
        SyntheticCheckpoint.WriteConfig(CheckpointSpec.Gpt2Small, path);
        string text = File.ReadAllText(path);
        File.WriteAllText(path, text.Replace("\"n_embd\": 768", "\"n_embd\": 768, \"n_embd\": 1024", StringComparison.Ordinal));
        Assert.Contains("\"n_embd\": 1024", File.ReadAllText(path), StringComparison.Ordinal);
        var e = Assert.Throws<ModelConfigException>(() => ModelConfig.Load(path));
        Assert.StartsWith(path, e.Message, StringComparison.Ordinal);
        Assert.Contains("Duplicate", e.Message, StringComparison.OrdinalIgnoreCase);
    }
}
