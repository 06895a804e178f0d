using System.Text;
using Assay.Input;
using Assay.Tests.Support;

namespace Assay.Tests.Input;

public sealed class TextInputTests
{
    private static InputRecord[] Read(string name, byte[] content, InputFields? fields = null, InputFormat format = InputFormat.Auto)
    {
        using var temp = new TempFolder();
        string path = temp.File(name);
        File.WriteAllBytes(path, content);
        using TextInputReader reader = TextInputReader.Open(path, format, fields);
        return reader.Records().ToArray();
    }

    private static byte[] Utf8(string s) => Encoding.UTF8.GetBytes(s);

    private static byte[] Join(params byte[][] parts) => parts.SelectMany(p => p).ToArray();

    [Fact]
    public void Plain_lines_reject_empty_and_invalid_lines_and_keep_counting()
    {
        byte[] content = Join(Utf8("\uFEFFfirst line\r\n\nthird\n   \n"), [0x66, 0xC3, 0x28, 0x0A], Utf8("last without newline"));
        InputRecord[] r = Read("texts.txt", content);
        Assert.Equal(6, r.Length);
        Assert.Equal(("first line", "1"), (r[0].Text, r[0].Id));
        Assert.Equal((2L, "empty text"), (r[1].Line, r[1].Rejection));
        Assert.Equal(("third", 3L), (r[2].Text, r[2].Line));
        Assert.Equal("empty text", r[3].Rejection);
        Assert.Equal((5L, "not valid UTF-8"), (r[4].Line, r[4].Rejection));
        Assert.Equal(("last without newline", 6L), (r[5].Text, r[5].Line));
    }

    [Fact]
    public void Jsonl_reads_text_id_and_label_fields_and_rejects_bad_lines_with_the_reason()
    {
        string content = string.Join("\n",
            """{"text": "a lamp", "id": "w1", "label": "artifact"}""",
            """{"text": "salt", "id": 7, "label": 3}""",
            """{"body": "no text field"}""",
            """{"text": 5}""",
            """not json""",
            """[1, 2]""",
            "",
            """{"text": "  "}""",
            """{"text": "deep", "label": {"x": 1}}""",
            """{"text": "no id"}""") + "\n";
        InputRecord[] r = Read("t.jsonl", Utf8(content));
        Assert.Equal(10, r.Length);
        Assert.Equal(("a lamp", "w1", "artifact"), (r[0].Text, r[0].Id, r[0].Label));
        Assert.Equal(("salt", "7", "3"), (r[1].Text, r[1].Id, r[1].Label));
        Assert.Equal("no \"text\" field", r[2].Rejection);
        Assert.Equal("field \"text\" is number, not a string", r[3].Rejection);
        Assert.StartsWith("not well-formed JSON", r[4].Rejection, StringComparison.Ordinal);
        Assert.Equal("expected a JSON object, found array", r[5].Rejection);
        Assert.Equal("empty line", r[6].Rejection);
        Assert.Equal("empty text", r[7].Rejection);
        Assert.StartsWith("field \"label\" is object", r[8].Rejection, StringComparison.Ordinal);
        Assert.Equal(("no id", "10", ""), (r[9].Text, r[9].Id, r[9].Label));
        Assert.Equal(Enumerable.Range(1, 10).Select(i => (long)i), r.Select(x => x.Line));
    }

    [Fact]
    public void Named_fields_are_required()
    {
        var fields = new InputFields { Text = "body", Id = "key", IdRequired = true, Label = "class", LabelRequired = true };
        InputRecord[] r = Read("t.jsonl", Utf8("{\"body\": \"x\", \"key\": \"k\", \"class\": \"c\"}\n{\"body\": \"y\", \"class\": \"c\"}\n{\"body\": \"z\", \"key\": \"k\"}\n"), fields);
        Assert.True(r[0].Accepted);
        Assert.Equal("no \"key\" field", r[1].Rejection);
        Assert.Equal("no \"class\" field", r[2].Rejection);
    }

    [Fact]
    public void Over_long_lines_are_rejected_and_the_next_line_is_read()
    {
        byte[] content = Join(Utf8("short\n"), Encoding.ASCII.GetBytes(new string('a', TextInputReader.MaxRecordBytes + 10)), Utf8("\nafter\n"));
        InputRecord[] r = Read("t.txt", content);
        Assert.Equal(3, r.Length);
        Assert.StartsWith("line is longer than", r[1].Rejection, StringComparison.Ordinal);
        Assert.Equal(("after", 3L), (r[2].Text, r[2].Line));
    }

    [Fact]
    public void Csv_goes_through_quoting_rules_and_reports_start_lines()
    {
        string content = "id,text,label\n" +
                         "a,\"a lamp, with a wick\",artifact\n" +
                         "b,\"two\nlines\",x\n" +
                         "c,too,many,fields\n" +
                         "d,,empty\n" +
                         "e,\"says \"\"hi\"\"\",quote\n";
        InputRecord[] r = Read("t.csv", Utf8(content));
        Assert.Equal(5, r.Length);
        Assert.Equal(("a lamp, with a wick", "a", "artifact", 2L), (r[0].Text, r[0].Id, r[0].Label, r[0].Line));
        Assert.Equal(("two\nlines", 3L), (r[1].Text, r[1].Line));
        Assert.Equal((5L, "the number of fields differs from the header's"), (r[2].Line, r[2].Rejection));
        Assert.Equal((6L, "empty text"), (r[3].Line, r[3].Rejection));
        Assert.Equal(("says \"hi\"", 7L), (r[4].Text, r[4].Line));
    }

    [Fact]
    public void Tsv_and_invalid_utf8_fields()
    {
        byte[] content = Join(Utf8("text\tlabel\nfirst\tA\n"), [0xFF, 0x61], Utf8("\tB\nthird\tC\n"));
        InputRecord[] r = Read("t.tsv", content);
        Assert.Equal(3, r.Length);
        Assert.Equal(("first", "A", "2"), (r[0].Text, r[0].Label, r[0].Id));
        Assert.Equal((3L, "not valid UTF-8"), (r[1].Line, r[1].Rejection));
        Assert.Equal("third", r[2].Text);
    }

    [Fact]
    public void A_header_without_the_text_column_names_the_columns()
    {
        TextInputException e = Assert.Throws<TextInputException>(() => Read("t.csv", Utf8("id,body\n1,x\n")));
        Assert.Contains("no column \"text\"", e.Message, StringComparison.Ordinal);
        Assert.Contains("\"id\", \"body\"", e.Message, StringComparison.Ordinal);
        Assert.Equal(1, e.Line);
    }

    [Theory]
    [InlineData("a.jsonl", InputFormat.JsonLines)]
    [InlineData("a.NDJSON", InputFormat.JsonLines)]
    [InlineData("a.csv", InputFormat.Csv)]
    [InlineData("a.tsv", InputFormat.Tsv)]
    [InlineData("a.txt", InputFormat.Lines)]
    [InlineData("a", InputFormat.Lines)]
    public void Format_follows_the_file_name(string name, InputFormat expected) => Assert.Equal(expected, TextInputReader.FormatOf(name));
}
