using System.Text.Json;
using Assay.Cli.Commands;
using Assay.Features;
using Assay.Fixtures;
using Assay.Input;
using Assay.Model;
using Assay.Tests.Cli;
using Assay.Tests.Output;
using Assay.Tests.Support;

namespace Assay.Tests.Tokenization;

/// <summary>
/// A Llama-style checkpoint with a SentencePiece tokenizer and a tokenizer_config.json that asks for the
/// beginning-of-sequence token: the prompt laid out as running text (checked against the reference implementation's
/// ids of the whole filled prompt, python3-sentencepiece), the token added and recorded, and `assay tokenize`.
/// </summary>
public sealed class SentencePieceCheckpointTests : IDisposable
{
    private const string Model = "bpe-bytes1-extra0";

    private readonly TempFolder _temp = new();

    public void Dispose() => _temp.Dispose();

    private string Folder(bool addBos)
    {
        string folder = SyntheticCheckpoint.Write(
            new CheckpointSpec { Family = "llama", Width = 32, Heads = 4, KeyValueHeads = 2, Layers = 2, Context = 48, Vocabulary = 400, Tokenizer = TokenizerFiles.None },
            _temp.File(addBos ? "bos" : "plain"));
        File.Copy(Path.Combine(SentencePieceTests.Trained.Value.Folder, Model + ".model"), Path.Combine(folder, "tokenizer.model"));
        File.WriteAllText(Path.Combine(folder, "tokenizer_config.json"), $$"""{"add_bos_token": {{(addBos ? "true" : "false")}}, "bos_token": "<s>"}""");
        return folder;
    }

    /// <summary>
    /// "Q: {text} A: it is" with the text "the software license": the engine tokenizes the pieces alone and lays them end
    /// to end, and the ids equal the reference's ids of the whole sentence (so the features are those of running text).
    /// </summary>
    [Fact]
    public void Prompt_pieces_laid_end_to_end_are_the_reference_ids_of_the_whole_text()
    {
        LanguageModel m = LanguageModel.Open(Folder(addBos: true));
        int[] expected = [1, .. SentencePieceTests.ReferenceIds(Model, "Q: the software license A: it is")];
        var extractor = new FeatureExtractor(m, new ExtractionOptions { Prompt = PromptTemplate.Parse("Q: {text} A: it is"), Features = [new HiddenStateFeature(-1)] });
        FeatureRow row = extractor.Extract(["the software license"]).Single();
        Assert.Equal(expected.Length, row.TokenCount);
        ForwardResult r = m.Forward([expected], new ForwardOptions { HiddenLayers = [m.Config.Layers] });
        Assert.Equal(r.HiddenState(m.Config.Layers, 0, expected.Length - 1).ToArray(), row.Values(0).ToArray());
        Assert.Equal([1], extractor.StartTokens);
    }

    [Fact]
    public void Extract_adds_and_records_the_beginning_of_sequence_token()
    {
        string input = ExtractionRunTests.WriteInput(_temp, 4);
        string folder = Folder(addBos: true);
        foreach ((string bos, bool added) in new[] { ("auto", true), ("never", false) })
        {
            string run = _temp.File("run-" + bos);
            var request = ExtractCommandTests.Request(input, run, "hidden") with { Model = folder };
            Assert.Equal(0, ExtractCommand.Run(request with { Bos = bos }, TextWriter.Null, TextWriter.Null, CancellationToken.None));
            using JsonDocument record = JsonDocument.Parse(File.ReadAllText(Path.Combine(run, "record.json")));
            JsonElement b = record.RootElement.GetProperty("settings").GetProperty("bos");
            Assert.Equal((bos, added), (b.GetProperty("policy").GetString(), b.GetProperty("added").GetBoolean()));
            if (added)
            {
                Assert.Equal((1, "<s>"), (b.GetProperty("id").GetInt32(), b.GetProperty("token").GetString()));
            }
        }
    }

    [Fact]
    public void Bos_always_is_refused_for_a_tokenizer_without_one_and_auto_follows_the_config()
    {
        string plain = Folder(addBos: false);
        var o = new StringWriter();
        Assert.Equal(0, TokenizeCommand.Run(plain, "the software", null, InputFormat.Auto, "text", "auto", json: true, o));
        using (JsonDocument doc = JsonDocument.Parse(o.ToString()))
        {
            Assert.False(doc.RootElement.GetProperty("bos").GetProperty("added").GetBoolean());
            Assert.Equal(SentencePieceTests.ReferenceIds(Model, "the Free Software Foundation, Inc.")[0], doc.RootElement.GetProperty("tokens")[0].GetProperty("id").GetInt32());
        }
        var e = Assert.Throws<ArgumentException>(() => TokenizeCommand.Run(Checkpoints.Folder(new CheckpointSpec()), "x", null, InputFormat.Auto, "text", "always", false, TextWriter.Null));
        Assert.Contains("--bos always", e.Message, StringComparison.Ordinal);
        Assert.Contains("has no beginning-of-sequence token", e.Message, StringComparison.Ordinal);
    }

    /// <summary>GPT-2's published ids ("Hello world" → 15496, 995, from memory) with their UTF-8 byte ranges.</summary>
    [Fact]
    public void Tokenize_shows_ids_tokens_and_byte_ranges()
    {
        string folder = Checkpoints.Folder(new CheckpointSpec { Tokenizer = TokenizerFiles.Gpt2, Vocabulary = 50257 });
        var o = new StringWriter();
        Assert.Equal(0, TokenizeCommand.Run(folder, "Hello world", null, InputFormat.Auto, "text", "auto", json: true, o));
        using JsonDocument doc = JsonDocument.Parse(o.ToString());
        JsonElement t = doc.RootElement.GetProperty("tokens");
        Assert.Equal((15496, "Hello", 0, 5), (t[0].GetProperty("id").GetInt32(), t[0].GetProperty("token").GetString(), t[0].GetProperty("start").GetInt32(), t[0].GetProperty("end").GetInt32()));
        Assert.Equal((995, " world", 5, 11), (t[1].GetProperty("id").GetInt32(), t[1].GetProperty("token").GetString(), t[1].GetProperty("start").GetInt32(), t[1].GetProperty("end").GetInt32()));

        var sp = new StringWriter();
        Assert.Equal(0, TokenizeCommand.Run(Folder(addBos: true), "wörld", null, InputFormat.Auto, "text", "auto", json: false, sp));
        string text = sp.ToString();
        Assert.Contains("starts with <s>", text, StringComparison.Ordinal);
        // ö is two UTF-8 bytes (1–3) held by two byte pieces that share its range.
        Assert.Contains("1–3            \"<0xC3>\"", text, StringComparison.Ordinal);
        Assert.Contains("1–3            \"<0xB6>\"", text, StringComparison.Ordinal);
        Assert.Throws<ArgumentException>(() => TokenizeCommand.Run(folder, null, null, InputFormat.Auto, "text", "auto", false, TextWriter.Null));
    }
}
