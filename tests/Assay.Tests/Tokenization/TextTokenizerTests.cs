using Assay.Fixtures;
using Assay.Tests.Support;
using Assay.Tokenization;

namespace Assay.Tests.Tokenization;

public sealed class TextTokenizerTests : IDisposable
{
    // Text with words, numbers, contractions, punctuation, runs of spaces, newlines and non-ASCII letters.
    private const string Sample = "Hello world! It's 2026; the lamp-lighter's ledger holds 1,204 entries.\n\n  Indented   line\twith tab.\n" +
        "Naïve café — Grüße, Ωmega, 東京, emoji 🙂 and <|endoftext|> marker.";

    private static readonly Lazy<string> Gpt2Files = new(() =>
    {
        string folder = Path.Combine(Path.GetTempPath(), "assay-tests-gpt2-tokenizer-" + Environment.ProcessId);
        Directory.CreateDirectory(folder);
        Gpt2TokenizerFiles.Write(folder);
        return folder;
    });

    private readonly TempFolder _temp = new();

    public void Dispose() => _temp.Dispose();

    [Fact]
    public void Embedded_gpt2_encoding_gives_the_published_ids()
    {
        // Published GPT-2 ids (common practice; also measured in the platform notes).
        TextTokenizer t = TextTokenizer.EmbeddedGpt2();
        Assert.Equal([15496, 995], t.Encode("Hello world"));
        Assert.Equal([18435, 995], t.Encode(" Hello world"));
        Assert.Equal(50256, t.EndOfTextId);
        Assert.Equal([50256], t.Encode("<|endoftext|>"));
        Assert.Equal(50257, t.VocabularySize);
    }

    [Fact]
    public void Vocab_and_merges_files_give_the_same_ids_as_the_embedded_encoding()
    {
        TextTokenizer files = TextTokenizer.OpenFolder(Gpt2Files.Value);
        TextTokenizer embedded = TextTokenizer.EmbeddedGpt2();
        Assert.Contains("vocab.json", files.Source, StringComparison.Ordinal);
        Assert.Equal([15496, 995], files.Encode("Hello world"));
        Assert.Equal([18435, 995], files.Encode(" Hello world"));
        Assert.Equal(50256, files.EndOfTextId);
        Assert.Equal(embedded.Encode(Sample), files.Encode(Sample));
        foreach (string line in Sample.Split('\n'))
        {
            Assert.Equal(embedded.Encode(line), files.Encode(line));
        }
        Assert.Equal(Sample, files.Decode(files.Encode(Sample)));
    }

    [Fact]
    public void Folder_without_tokenizer_files_uses_the_embedded_encoding() =>
        Assert.Equal("embedded GPT-2 encoding", TextTokenizer.OpenFolder(_temp.Path).Source);

    [Fact]
    public void Small_vocabulary_applies_merges_in_priority_order()
    {
        SmallVocabulary.WriteVocabAndMerges(_temp.Path);
        TextTokenizer t = TextTokenizer.OpenFolder(_temp.Path);
        // " the" → Ġ t h e → (Ġ t) → Ġt, (h e) → he, (Ġt he) → Ġthe = id 259 by construction of the fixture.
        Assert.Equal([259], t.Encode(" the"));
        Assert.Equal([(int)'x', 256], t.Encode("x<|endoftext|>"));
        Assert.Equal(265, t.VocabularySize);
    }

    [Fact]
    public void Json_definition_gives_the_same_ids_as_vocab_and_merges()
    {
        using var other = new TempFolder();
        SmallVocabulary.WriteVocabAndMerges(_temp.Path);
        SmallVocabulary.WriteDefinition(other.Path);
        TextTokenizer a = TextTokenizer.OpenFolder(_temp.Path);
        TextTokenizer b = TextTokenizer.OpenFolder(other.Path);
        Assert.EndsWith("tokenizer.json", b.Source, StringComparison.Ordinal);
        Assert.Equal(a.Encode(Sample), b.Encode(Sample));
    }

    /// <summary>
    /// Parts of a JSON definition the reader does not implement are refused with their JSON path, not ignored (ignoring
    /// them would shift ids silently); the parts it implements (TokenizerDefinitionTests checks them against an
    /// independent implementation) are read: here the fixture's " the" keeps its id 259.
    /// </summary>
    [Theory]
    [InlineData("\"normalizer\": {\"type\": \"Lowercase\"}", "normalizer.type \"Lowercase\" is not implemented")]
    [InlineData("\"pre_tokenizer\": {\"type\": \"WhitespaceSplit\"}", "pre_tokenizer.type \"WhitespaceSplit\" is not implemented")]
    [InlineData("\"pre_tokenizer\": {\"type\": \"ByteLevel\", \"add_prefix_space\": true}", "pre_tokenizer.add_prefix_space true is not implemented")]
    [InlineData("\"post_processor\": {\"type\": \"TemplateProcessing\"}", "post_processor.single is missing or not a list")]
    [InlineData("\"post_processor\": {\"type\": \"RobertaProcessing\"}", "post_processor.type \"RobertaProcessing\" is not implemented")]
    [InlineData("\"model\": {\"byte_fallback\": true}", "model.byte_fallback is on but model.vocab has no byte token <0x00>")]
    [InlineData("\"truncation\": {\"max_length\": 8}", "truncation is set")]
    [InlineData("\"model\": {\"ignore_merges\": true}, \"pre_tokenizer\": {\"type\": \"ByteLevel\"}", null)]
    [InlineData("\"normalizer\": {\"type\": \"NFC\"}, \"pre_tokenizer\": {\"type\": \"ByteLevel\"}", null)]
    [InlineData("\"pre_tokenizer\": {\"type\": \"ByteLevel\", \"add_prefix_space\": false, \"trim_offsets\": true, \"use_regex\": true}", null)]
    [InlineData("\"post_processor\": {\"type\": \"ByteLevel\", \"trim_offsets\": true}", null)]
    public void Json_definition_parts_it_does_not_implement_are_refused(string part, string? message)
    {
        SmallVocabulary.WriteDefinition(_temp.Path);
        var root = System.Text.Json.Nodes.JsonNode.Parse(File.ReadAllText(_temp.File("tokenizer.json")))!.AsObject();
        var extra = System.Text.Json.Nodes.JsonNode.Parse("{" + part + "}")!.AsObject();
        foreach ((string key, System.Text.Json.Nodes.JsonNode? value) in extra.ToList())
        {
            extra.Remove(key);
            if (key == "model")
            {
                foreach ((string k, System.Text.Json.Nodes.JsonNode? v) in value!.AsObject().ToList())
                {
                    value.AsObject().Remove(k);
                    root["model"]![k] = v;
                }
                continue;
            }
            root[key] = value;
        }
        File.WriteAllText(_temp.File("tokenizer.json"), root.ToJsonString());
        if (message is null)
        {
            Assert.Equal([259], TextTokenizer.OpenFolder(_temp.Path).Encode(" the"));
            return;
        }
        var e = Assert.Throws<TokenizerFileException>(() => TextTokenizer.OpenFolder(_temp.Path));
        Assert.Equal(_temp.File("tokenizer.json"), e.FilePath);
        Assert.Contains(message, e.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void Refuses_vocab_without_merges()
    {
        SmallVocabulary.WriteVocabAndMerges(_temp.Path);
        File.Delete(_temp.File("merges.txt"));
        var e = Assert.Throws<TokenizerFileException>(() => TextTokenizer.OpenFolder(_temp.Path));
        Assert.Equal(_temp.File("merges.txt"), e.FilePath);
    }

    [Fact]
    public void Refuses_a_malformed_merge_line_naming_the_line()
    {
        SmallVocabulary.WriteVocabAndMerges(_temp.Path);
        File.AppendAllText(_temp.File("merges.txt"), "onlyonetoken\n");
        var e = Assert.Throws<TokenizerFileException>(() => TextTokenizer.OpenFolder(_temp.Path));
        Assert.Contains("line 10:", e.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void Refuses_a_merge_whose_result_is_not_in_the_vocabulary()
    {
        SmallVocabulary.WriteVocabAndMerges(_temp.Path);
        File.AppendAllText(_temp.File("merges.txt"), "q z\n");
        var e = Assert.Throws<TokenizerFileException>(() => TextTokenizer.OpenFolder(_temp.Path));
        Assert.Contains("makes 'qz', which is not in", e.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void Refuses_invalid_utf8_in_merges()
    {
        SmallVocabulary.WriteVocabAndMerges(_temp.Path);
        File.AppendAllBytes(_temp.File("merges.txt"), [0xC3, 0x28, (byte)'\n']);
        var e = Assert.Throws<TokenizerFileException>(() => TextTokenizer.OpenFolder(_temp.Path));
        Assert.Contains("not valid UTF-8", e.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void Refuses_an_id_given_to_two_tokens()
    {
        File.WriteAllText(_temp.File("vocab.json"), "{\"a\": 0, \"b\": 0, \"<|endoftext|>\": 1}");
        File.WriteAllText(_temp.File("merges.txt"), "");
        var e = Assert.Throws<TokenizerFileException>(() => TextTokenizer.OpenFolder(_temp.Path));
        Assert.Contains("id 0 is given to more than one token", e.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void Refuses_a_definition_of_another_kind()
    {
        File.WriteAllText(_temp.File("tokenizer.json"), "{\"model\": {\"type\": \"WordPiece\", \"vocab\": {}}}");
        var e = Assert.Throws<TokenizerFileException>(() => TextTokenizer.OpenFolder(_temp.Path));
        Assert.Contains("must be \"BPE\"", e.Message, StringComparison.Ordinal);
    }
}
