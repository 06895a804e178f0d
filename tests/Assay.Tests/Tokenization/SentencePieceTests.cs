using System.Text.Json;
using Assay.Tests.Support;
using Assay.Tokenization;

namespace Assay.Tests.Tokenization;

/// <summary>
/// SentencePiece models (tokenizer.model) against the reference implementation, Debian's python3-sentencepiece, which
/// trains small models in the test (BPE and unigram, byte fallback on and off, remove_extra_whitespaces on and off,
/// identity normalization: eight models) and encodes a corpus of accents, CJK, emoji, digits, runs of spaces and tabs, newlines and
/// characters outside the vocabulary. The engine reads the same .model files.
/// </summary>
public sealed class SentencePieceTests : IDisposable
{
    /// <summary>Lines to encode: some characters occur in the training text, some never do (bytes or unknown pieces).</summary>
    private static readonly string[] Lines =
    [
        "Hello wörld", "Café naïve résumé über", "東京 日本語の文", "emoji 😀 and 🚀!", "digits 123 4567 89 0.5",
        "runs   of    spaces", "tabs\tand\t\ttabs", "new\nlines\n", "  leading and trailing  ", "bytes ʘ ᚠ ߷ outside",
        "", "x", " ", "\t", "é", "a b c d e f g", "the Free Software Foundation, Inc.", "ÅÄÖ ÆØ ĳ ŉ", "𝔘𝔫𝔦𝔠𝔬𝔡𝔢",
        "Q: the software license A: it is",
    ];

    internal static readonly Lazy<(string Folder, JsonDocument Reference)> Trained = new(Train);

    /// <summary>The reference implementation's ids of <paramref name="line"/> (one of the corpus lines) under model <paramref name="name"/>.</summary>
    internal static int[] ReferenceIds(string name, string line) =>
        [.. Trained.Value.Reference.RootElement.GetProperty("ids").GetProperty(name)[Array.IndexOf(Lines, line)].EnumerateArray().Select(e => e.GetInt32())];

    private readonly TempFolder _temp = new();

    public void Dispose() => _temp.Dispose();

    public static TheoryData<string> Models() =>
        ["bpe-bytes1-extra0", "bpe-bytes1-extra1", "bpe-bytes0-extra0", "bpe-bytes0-extra1",
         "unigram-bytes1-extra0", "unigram-bytes1-extra1", "unigram-bytes0-extra0", "unigram-bytes0-extra1"];

    [Theory]
    [MemberData(nameof(Models))]
    public void Ids_equal_the_reference_implementation(string name)
    {
        (string folder, JsonDocument reference) = Trained.Value;
        TextTokenizer t = TextTokenizer.FromSentencePiece(Path.Combine(folder, name + ".model"));
        Assert.True(t.IsSentencePiece);
        JsonElement expected = reference.RootElement.GetProperty("ids").GetProperty(name);
        for (int i = 0; i < Lines.Length; i++)
        {
            int[] ids = [.. expected[i].EnumerateArray().Select(e => e.GetInt32())];
            Assert.True(ids.SequenceEqual(t.Encode(Lines[i])),
                $"{name}, line {i} {JsonSerializer.Serialize(Lines[i])}: sentencepiece [{string.Join(",", ids)}], engine [{string.Join(",", t.Encode(Lines[i]))}]");
        }
    }

    /// <summary>
    /// A piece laid after others (a prompt's later piece, a word after the text) has no dummy-prefix space: with
    /// single spaces, the reference's ids of "a b" are the engine's "a" then " b" as a continuation.
    /// </summary>
    [Theory]
    [InlineData("bpe-bytes1-extra0")]
    [InlineData("unigram-bytes0-extra1")]
    public void A_continuation_has_no_dummy_prefix(string name)
    {
        (string folder, JsonDocument reference) = Trained.Value;
        TextTokenizer t = TextTokenizer.FromSentencePiece(Path.Combine(folder, name + ".model"));
        int line = Array.IndexOf(Lines, "a b c d e f g");
        int[] expected = [.. reference.RootElement.GetProperty("ids").GetProperty(name)[line].EnumerateArray().Select(e => e.GetInt32())];
        int[] laid = [.. t.Encode("a b c"), .. t.EncodeContinuation(" d e f g")];
        Assert.Equal(expected, laid);
        Assert.NotEqual(t.Encode("d e f g"), t.EncodeContinuation("d e f g"));
    }

    [Fact]
    public void A_truncated_model_is_refused_naming_the_file()
    {
        (string folder, _) = Trained.Value;
        byte[] bytes = File.ReadAllBytes(Path.Combine(folder, "bpe-bytes1-extra0.model"));
        string path = _temp.File("tokenizer.model");
        File.WriteAllBytes(path, bytes[..(bytes.Length / 2)]);
        var e = Assert.Throws<TokenizerFileException>(() => TextTokenizer.FromSentencePiece(path));
        Assert.Equal(path, e.FilePath);
        Assert.Contains("not a readable SentencePiece model", e.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void A_folder_with_a_sentencepiece_model_and_its_config_adds_the_bos_token()
    {
        (string folder, _) = Trained.Value;
        File.Copy(Path.Combine(folder, "bpe-bytes1-extra0.model"), _temp.File("tokenizer.model"));
        TextTokenizer plain = TextTokenizer.OpenFolder(_temp.Path);
        Assert.Equal((1, false, 2), (plain.BeginningOfSequenceId, plain.AddsBeginningOfSequence, plain.EndOfTextId));   // the trainer's defaults: <s> 1, </s> 2
        Assert.Empty(plain.SequenceStart(BeginningOfSequence.Auto));
        File.WriteAllText(_temp.File("tokenizer_config.json"), """{"add_bos_token": true, "add_eos_token": false, "bos_token": {"content": "<s>", "lstrip": false}}""");
        TextTokenizer configured = TextTokenizer.OpenFolder(_temp.Path);
        Assert.True(configured.AddsBeginningOfSequence);
        Assert.Equal([1], configured.SequenceStart(BeginningOfSequence.Auto));
        Assert.Equal([1], configured.SequenceStart(BeginningOfSequence.Always));
        Assert.Empty(configured.SequenceStart(BeginningOfSequence.Never));
        Assert.EndsWith("tokenizer_config.json", configured.Files[^1], StringComparison.Ordinal);

        File.WriteAllText(_temp.File("tokenizer_config.json"), """{"add_bos_token": true, "bos_token": "<|begin|>"}""");
        var e = Assert.Throws<TokenizerFileException>(() => TextTokenizer.OpenFolder(_temp.Path));
        Assert.Contains("bos_token '<|begin|>' is not a token of", e.Message, StringComparison.Ordinal);
    }

    /// <summary>A 1 MiB line is encoded in runs; the work bound (Σ characters per call²) stays linear in the length.</summary>
    [Fact]
    public void Long_lines_are_encoded_in_bounded_runs()
    {
        (string folder, JsonDocument _) = Trained.Value;
        TextTokenizer t = TextTokenizer.FromSentencePiece(Path.Combine(folder, "bpe-bytes1-extra0.model"));
        string words = string.Concat(Enumerable.Repeat("the free software ", 60_000));
        int[] ids = t.Encode(words);
        Assert.True(ids.Length > 100_000);
        Assert.Equal(words.TrimEnd(), t.Decode(ids).Trim());
        Assert.True(t.Work < 4096L * (words.Length + 4096), $"work {t.Work}");
    }

    private static (string, JsonDocument) Train()
    {
        string folder = Path.Combine(Path.GetTempPath(), "assay-spm-" + Environment.ProcessId);
        Directory.CreateDirectory(folder);
        // Training text: the GPL-3 licence text that Debian ships in base-files, plus a few lines with accents and CJK.
        string licence = "/usr/share/common-licenses/GPL-3";
        Assert.True(File.Exists(licence), $"{licence} is missing (Debian base-files)");
        File.WriteAllText(Path.Combine(folder, "corpus.txt"),
            File.ReadAllText(licence) + "\nCafé naïve résumé über Åland\n東京 日本語\nThe 1st of 2 and 3.\n");
        File.WriteAllText(Path.Combine(folder, "lines.json"), JsonSerializer.Serialize(Lines));
        string json = PythonReference.Run("sentencepiece_reference.py", folder, Path.Combine(folder, "corpus.txt"), Path.Combine(folder, "lines.json"));
        return (folder, JsonDocument.Parse(json));
    }
}
