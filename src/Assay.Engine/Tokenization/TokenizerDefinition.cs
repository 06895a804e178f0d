using System.Globalization;
using System.Text;
using System.Text.Json;
using System.Text.RegularExpressions;
using Microsoft.ML.Tokenizers;

namespace Assay.Tokenization;

/// <summary>
/// A JSON tokenizer definition (tokenizer.json) beyond plain GPT-2 byte-level BPE: the parts it names are read and
/// run in their order — added tokens matched in the raw text first (lstrip, rstrip and single_word honoured); then the normalizer (NFC,
/// NFKC, Prepend, Replace of a string, or a Sequence of these); the pre-tokenizer (Split by a regex, isolating its
/// matches; ByteLevel, with or without GPT-2's pattern; a Sequence of these; or Metaspace alone); the BPE model (byte-level when a
/// ByteLevel pre-tokenizer is named, else on the normalized characters, with byte_fallback to &lt;0xNN&gt; pieces,
/// fuse_unk and ignore_merges); and the post-processor's template, which says whether a beginning-of-sequence token goes
/// first. Merges are done by Microsoft.ML.Tokenizers' BpeTokenizer, one pre-token per call. Any other part or value is
/// refused with its JSON path; the decoder is not read (it does not change ids).
/// </summary>
internal sealed class TokenizerDefinition
{
    /// <summary>A split pattern's time limit per text: a pattern that backtracks for longer is refused at use, naming the file.</summary>
    private static readonly TimeSpan PatternTimeout = TimeSpan.FromSeconds(2);

    private readonly string _path;
    private readonly BpeTokenizer _bpe;
    private readonly IReadOnlyList<(Func<string, string> Apply, bool Prepends)> _normalizers;
    private readonly IReadOnlyList<Regex> _splits;
    private readonly MetaspaceRule? _metaspace;
    private readonly Dictionary<string, int> _vocabulary;
    private readonly (string Content, int Id, bool LeftStrip, bool RightStrip, bool SingleWord)[] _added;
    private readonly bool _byteLevel, _ignoreMerges, _byteFallback, _fuseUnknown;
    private readonly int _unknown;

    private TokenizerDefinition(string path, BpeTokenizer bpe, IReadOnlyList<(Func<string, string>, bool)> normalizers, IReadOnlyList<Regex> splits,
        MetaspaceRule? metaspace, Dictionary<string, int> vocabulary, (string, int, bool, bool, bool)[] added, bool byteLevel, bool ignoreMerges, bool byteFallback, bool fuseUnknown,
        int unknown, int? templateStart)
    {
        _path = path;
        _bpe = bpe;
        _normalizers = normalizers;
        _splits = splits;
        _metaspace = metaspace;
        _vocabulary = vocabulary;
        _added = added;
        _byteLevel = byteLevel;
        _ignoreMerges = ignoreMerges;
        _byteFallback = byteFallback;
        _fuseUnknown = fuseUnknown;
        _unknown = unknown;
        TemplateStart = templateStart;
        Tokens = new string[Math.Max(vocabulary.Count == 0 ? 0 : vocabulary.Values.Max(), added.Length == 0 ? 0 : added.Max(a => a.Item2)) + 1];
        foreach ((string token, int id) in vocabulary)
        {
            Tokens[id] = token;
        }
        foreach ((string content, int id, _, _, _) in added)
        {
            Tokens[id] = content;
        }
    }

    /// <summary>
    /// Whether the normalizer or a Metaspace pre-tokenizer puts a prefix before each text (SentencePiece-style
    /// definitions: the dummy-prefix ▁), which a continuation leaves out.
    /// </summary>
    public bool HasDummyPrefix => _normalizers.Any(n => n.Prepends) || _metaspace is { Scheme: not MetaspacePrepend.Never };

    /// <summary>Every token's text by id (byte-level tokens in the byte alphabet).</summary>
    public string[] Tokens { get; }

    /// <summary>The id the post-processor's template puts first, or null.</summary>
    public int? TemplateStart { get; }

    /// <summary>The id of an added or vocabulary token, or null.</summary>
    public int? Id(string token)
    {
        foreach ((string content, int id, _, _, _) in _added)
        {
            if (content == token)
            {
                return id;
            }
        }
        return _vocabulary.TryGetValue(token, out int v) ? v : null;
    }

    /// <summary>The text of ids: added tokens as written, the rest through the BPE model's decoder.</summary>
    public string Decode(IEnumerable<int> ids)
    {
        var sb = new StringBuilder();
        var run = new List<int>();
        foreach (int id in ids)
        {
            int added = System.Array.FindIndex(_added, a => a.Id == id);
            if (added < 0)
            {
                run.Add(id);
                continue;
            }
            sb.Append(_bpe.Decode(run));
            run.Clear();
            sb.Append(_added[added].Content);
        }
        return sb.Append(_bpe.Decode(run)).ToString();
    }

    /// <summary>A token as shown to a user: added tokens as written; byte-level tokens as the text of their bytes; others as spelled.</summary>
    public string TokenText(int id) =>
        (uint)id < (uint)Tokens.Length && Tokens[id] is { } t
            ? _byteLevel && System.Array.FindIndex(_added, a => a.Id == id) < 0 ? _bpe.Decode([id]) ?? t : t
            : throw new ArgumentOutOfRangeException(nameof(id), id, "not a token of the definition");

    /// <summary>
    /// Whether this definition is plain GPT-2 byte-level BPE (no normalizer; no pre-tokenizer, or ByteLevel with GPT-2's
    /// pattern; no added tokens but the end-of-text marker; no template), which <see cref="TextTokenizer"/> runs on its
    /// own path as it runs vocab.json + merges.txt. Anything more goes through <see cref="Read"/>, where a definition
    /// without a ByteLevel pre-tokenizer is BPE over characters, as the format defines it.
    /// </summary>
    public static bool IsPlainByteLevel(JsonElement root, JsonElement model)
    {
        static bool Absent(JsonElement o, string name) => !o.TryGetProperty(name, out JsonElement e) || e.ValueKind == JsonValueKind.Null;
        static bool Flag(JsonElement o, string name) => o.TryGetProperty(name, out JsonElement e) && e.ValueKind == JsonValueKind.True;
        bool pre = Absent(root, "pre_tokenizer") || (Type(root.GetProperty("pre_tokenizer")) == "ByteLevel"
            && !Flag(root.GetProperty("pre_tokenizer"), "add_prefix_space")
            && !(root.GetProperty("pre_tokenizer").TryGetProperty("use_regex", out JsonElement r) && r.ValueKind == JsonValueKind.False));
        bool post = Absent(root, "post_processor") || Type(root.GetProperty("post_processor")) == "ByteLevel";
        // Added tokens other than the end-of-text marker (which the plain path matches itself) need the full reader.
        bool added = Absent(root, "added_tokens") || (root.GetProperty("added_tokens").ValueKind == JsonValueKind.Array
            && root.GetProperty("added_tokens").EnumerateArray().All(t => t.ValueKind == JsonValueKind.Object
                && t.TryGetProperty("content", out JsonElement c) && c.ValueKind == JsonValueKind.String && c.GetString() == TextTokenizer.EndOfTextMarker));
        return Absent(root, "normalizer") && pre && post && added && Absent(root, "truncation") && Absent(root, "padding")
            && !Flag(model, "byte_fallback") && !Flag(model, "ignore_merges");
    }

    /// <summary>Reads every part of the definition; throws naming the JSON path of the first one it does not implement.</summary>
    public static TokenizerDefinition Read(string path, JsonElement root, JsonElement model, Dictionary<string, int> vocabulary, List<string> merges)
    {
        foreach (string unsupported in new[] { "truncation", "padding" })
        {
            if (root.TryGetProperty(unsupported, out JsonElement e) && e.ValueKind != JsonValueKind.Null)
            {
                throw Refuse(path, unsupported, "is set; a definition that cuts or pads is not read");
            }
        }
        var normalizers = new List<(Func<string, string>, bool)>();
        if (root.TryGetProperty("normalizer", out JsonElement n) && n.ValueKind != JsonValueKind.Null)
        {
            Normalizers(path, "normalizer", n, normalizers);
        }
        var splits = new List<Regex>();
        bool byteLevel = false;
        MetaspaceRule? metaspace = null;
        if (root.TryGetProperty("pre_tokenizer", out JsonElement p) && p.ValueKind != JsonValueKind.Null)
        {
            if (Type(p) == "Metaspace")
            {
                metaspace = Metaspace(path, "pre_tokenizer", p);
            }
            else
            {
                PreTokenizers(path, "pre_tokenizer", p, splits, ref byteLevel);
            }
        }
        bool byteFallback = Bool(path, model, "model.byte_fallback");
        bool ignoreMerges = Bool(path, model, "model.ignore_merges");
        bool fuseUnknown = Bool(path, model, "model.fuse_unk");
        foreach (string affix in new[] { "continuing_subword_prefix", "end_of_word_suffix" })
        {
            if (model.TryGetProperty(affix, out JsonElement a) && a.ValueKind == JsonValueKind.String && a.GetString()!.Length > 0)
            {
                throw Refuse(path, "model." + affix, "is not implemented");
            }
        }
        if (model.TryGetProperty("dropout", out JsonElement dropout) && dropout.ValueKind == JsonValueKind.Number && dropout.GetDouble() != 0)
        {
            throw Refuse(path, "model.dropout", "is not implemented (it makes ids random)");
        }
        string? unknownToken = model.TryGetProperty("unk_token", out JsonElement unk) && unk.ValueKind == JsonValueKind.String ? unk.GetString() : null;
        int unknown = -1;
        if (unknownToken is not null && !vocabulary.TryGetValue(unknownToken, out unknown))
        {
            throw Refuse(path, "model.unk_token", $"'{Echo.Of(unknownToken)}' is not in model.vocab");
        }
        if (byteFallback)
        {
            if (byteLevel)
            {
                throw Refuse(path, "model.byte_fallback", "is set on a byte-level model, which never needs it");
            }
            for (int b = 0; b < 256; b++)
            {
                string name = string.Create(CultureInfo.InvariantCulture, $"<0x{b:X2}>");
                if (!vocabulary.ContainsKey(name))
                {
                    throw Refuse(path, "model.byte_fallback", $"is on but model.vocab has no byte token {name}");
                }
            }
        }
        var added = AddedTokens(path, root, vocabulary);
        int? start = Template(path, root, added);

        BpeTokenizer bpe;
        try
        {
            bpe = BpeTokenizer.Create(new BpeOptions(vocabulary)
            {
                Merges = merges,
                ByteLevel = byteLevel,
                UnknownToken = unknownToken,
                FuseUnknownTokens = false,
            });
        }
        catch (Exception e) when (e is ArgumentException or InvalidOperationException or FormatException)
        {
            throw new TokenizerFileException(path, $"the BPE tables are inconsistent ({e.Message})", e);
        }
        return new TokenizerDefinition(path, bpe, normalizers, splits, metaspace, vocabulary, [.. added], byteLevel, ignoreMerges, byteFallback, fuseUnknown, unknown, start);
    }

    /// <summary>
    /// Ids of a text, and where <paramref name="ranges"/> is given each token's character range in it;
    /// <paramref name="continuation"/> leaves out a Prepend normalizer's prefix (a piece laid after others).
    /// </summary>
    public void Encode(string text, bool continuation, List<int> ids, List<(int, int)>? ranges)
    {
        int at = 0;
        while (at < text.Length)
        {
            (int match, int id, int from, int to) = NextAdded(text, at);
            EncodeSegment(text, at, match < 0 ? text.Length : from, continuation, ids, ranges);
            if (match < 0)
            {
                return;
            }
            ids.Add(id);
            ranges?.Add((from, to));
            at = to;
        }
    }

    /// <summary>The next added token at or after <paramref name="at"/> (the longest at the first position), with the span it takes once lstrip/rstrip absorb spaces.</summary>
    private (int Match, int Id, int From, int To) NextAdded(string text, int at)
    {
        int best = -1, bestLength = 0, bestIndex = -1;
        for (int i = 0; i < _added.Length; i++)
        {
            int found = text.IndexOf(_added[i].Content, at, StringComparison.Ordinal);
            // single_word: only an occurrence with no word character right before or after it.
            while (found >= 0 && _added[i].SingleWord && !WholeWord(text, found, _added[i].Content.Length))
            {
                found = text.IndexOf(_added[i].Content, found + 1, StringComparison.Ordinal);
            }
            if (found >= 0 && (best < 0 || found < best || (found == best && _added[i].Content.Length > bestLength)))
            {
                (best, bestLength, bestIndex) = (found, _added[i].Content.Length, i);
            }
        }
        if (bestIndex < 0)
        {
            return (-1, 0, 0, 0);
        }
        int from = best, to = best + bestLength;
        if (_added[bestIndex].LeftStrip)
        {
            while (from > at && char.IsWhiteSpace(text[from - 1]))
            {
                from--;
            }
        }
        if (_added[bestIndex].RightStrip)
        {
            while (to < text.Length && char.IsWhiteSpace(text[to]))
            {
                to++;
            }
        }
        return (bestIndex, _added[bestIndex].Id, from, to);
    }

    private static bool WholeWord(string text, int at, int length)
    {
        static bool Word(char c) => char.IsLetterOrDigit(c) || c == '_';
        return (at == 0 || !Word(text[at - 1])) && (at + length >= text.Length || !Word(text[at + length]));
    }

    private void EncodeSegment(string text, int start, int end, bool continuation, List<int> ids, List<(int, int)>? ranges)
    {
        if (end <= start)
        {
            return;
        }
        string segment = text[start..end];
        string normalized = segment;
        foreach ((Func<string, string> normalize, bool prepends) in _normalizers)
        {
            if (!(prepends && continuation && start == 0))
            {
                normalized = normalize(normalized);
            }
        }
        // Offsets stay exact when normalizing kept the text or only put a prefix before it; otherwise each token gets the segment's range.
        int shift = normalized.EndsWith(segment, StringComparison.Ordinal) ? normalized.Length - segment.Length : -1;
        List<(int Start, int Length)> pieces;
        if (_metaspace is { } m)
        {
            // Spaces become the replacement (one character for one, so offsets hold); the prefix goes before a segment
            // that does not start with it: every segment (always), the text's first one (first), or none (never).
            normalized = normalized.Replace(' ', m.Replacement);
            bool prepend = !(continuation && start == 0) && normalized.Length > 0 && normalized[0] != m.Replacement
                && (m.Scheme == MetaspacePrepend.Always || (m.Scheme == MetaspacePrepend.First && start == 0));
            if (prepend)
            {
                normalized = m.Replacement + normalized;
                shift = shift < 0 ? -1 : shift + 1;
            }
            pieces = m.Split ? BeforeEach(normalized, m.Replacement) : [(0, normalized.Length)];
        }
        else
        {
            pieces = [(0, normalized.Length)];
        }
        try
        {
            foreach (Regex split in _splits)
            {
                pieces = Isolate(normalized, pieces, split);
            }
        }
        catch (RegexMatchTimeoutException)
        {
            throw new TokenizerFileException(_path, $"pre_tokenizer: its split pattern ran past {PatternTimeout.TotalSeconds:G} s on a text of {segment.Length:N0} characters (catastrophic backtracking); the definition is not usable");
        }
        foreach ((int pieceStart, int length) in pieces)
        {
            string piece = normalized.Substring(pieceStart, length);
            int first = ids.Count;
            EncodePiece(piece, ids, ranges, pieceStart);
            if (ranges is not null)
            {
                for (int k = first; k < ranges.Count; k++)
                {
                    (int a, int b) = ranges[k];
                    ranges[k] = shift < 0 ? (start, end) : (start + Math.Clamp(a - shift, 0, segment.Length), start + Math.Clamp(b - shift, 0, segment.Length));
                }
            }
        }
    }

    /// <summary>Split before each <paramref name="mark"/>, which starts the next piece (the "MergedWithNext" behaviour).</summary>
    private static List<(int, int)> BeforeEach(string text, char mark)
    {
        var result = new List<(int, int)>();
        int at = 0;
        for (int i = 1; i <= text.Length; i++)
        {
            if (i == text.Length || text[i] == mark)
            {
                result.Add((at, i - at));
                at = i;
            }
        }
        return result;
    }

    /// <summary>Split with the "Isolated" behaviour: each match and each stretch between matches is its own piece.</summary>
    private static List<(int, int)> Isolate(string text, List<(int Start, int Length)> pieces, Regex split)
    {
        var result = new List<(int, int)>();
        foreach ((int start, int length) in pieces)
        {
            int at = start;
            foreach (ValueMatch m in split.EnumerateMatches(text.AsSpan(start, length)))
            {
                if (m.Length == 0)
                {
                    continue;
                }
                if (start + m.Index > at)
                {
                    result.Add((at, start + m.Index - at));
                }
                result.Add((start + m.Index, m.Length));
                at = start + m.Index + m.Length;
            }
            if (start + length > at)
            {
                result.Add((at, start + length - at));
            }
        }
        return result;
    }

    private void EncodePiece(string piece, List<int> ids, List<(int, int)>? ranges, int offset)
    {
        if (_ignoreMerges && _vocabulary.TryGetValue(_byteLevel ? ByteLevelText(piece) : piece, out int whole))
        {
            ids.Add(whole);
            ranges?.Add((offset, offset + piece.Length));
            return;
        }
        foreach (EncodedToken t in _bpe.EncodeToTokens(piece, out _, considerPreTokenization: false, considerNormalization: false))
        {
            (int a, int b) = (offset + t.Offset.Start.GetOffset(piece.Length), offset + t.Offset.End.GetOffset(piece.Length));
            if (t.Id == _unknown && _byteFallback)
            {
                foreach (byte x in Encoding.UTF8.GetBytes(piece[(a - offset)..(b - offset)]))
                {
                    ids.Add(_vocabulary[string.Create(CultureInfo.InvariantCulture, $"<0x{x:X2}>")]);
                    ranges?.Add((a, b));
                }
                continue;
            }
            if (t.Id == _unknown && _fuseUnknown && ids.Count > 0 && ids[^1] == _unknown)
            {
                if (ranges is not null)
                {
                    ranges[^1] = (ranges[^1].Item1, b);
                }
                continue;
            }
            ids.Add(t.Id);
            ranges?.Add((a, b));
        }
    }

    /// <summary>A text in GPT-2's byte alphabet (common practice: printable bytes stand for themselves, the others map to U+0100 on).</summary>
    private static string ByteLevelText(string text)
    {
        var sb = new StringBuilder();
        foreach (byte b in Encoding.UTF8.GetBytes(text))
        {
            sb.Append(ByteAlphabet[b]);
        }
        return sb.ToString();
    }

    private static readonly char[] ByteAlphabet = BuildAlphabet();

    private static char[] BuildAlphabet()
    {
        char[] map = new char[256];
        int next = 256;
        for (int b = 0; b < 256; b++)
        {
            bool printable = (b >= '!' && b <= '~') || (b >= 0xA1 && b <= 0xAC) || (b >= 0xAE && b <= 0xFF);
            map[b] = printable ? (char)b : (char)next++;
        }
        return map;
    }

    private static void Normalizers(string path, string at, JsonElement n, List<(Func<string, string>, bool)> into)
    {
        switch (Type(n))
        {
            case "NFC":
                into.Add((s => s.Normalize(NormalizationForm.FormC), false));
                break;
            case "NFKC":
                into.Add((s => s.Normalize(NormalizationForm.FormKC), false));
                break;
            case "Prepend":
            {
                string prepend = String(path, n, at, "prepend");
                into.Add((s => s.Length == 0 ? s : prepend + s, true));
                break;
            }
            case "Replace":
            {
                if (!n.TryGetProperty("pattern", out JsonElement pattern) || pattern.ValueKind != JsonValueKind.Object
                    || !pattern.TryGetProperty("String", out JsonElement literal) || literal.ValueKind != JsonValueKind.String)
                {
                    throw Refuse(path, at + ".pattern", "is not a {\"String\": …} pattern; regex replacements are not implemented");
                }
                string from = literal.GetString()!, to = String(path, n, at, "content");
                if (from.Length == 0)
                {
                    throw Refuse(path, at + ".pattern.String", "is empty");
                }
                into.Add((s => s.Replace(from, to, StringComparison.Ordinal), false));
                break;
            }
            case "Sequence":
            {
                JsonElement list = Array(path, n, at, "normalizers");
                int i = 0;
                foreach (JsonElement item in list.EnumerateArray())
                {
                    Normalizers(path, $"{at}.normalizers[{i++}]", item, into);
                }
                break;
            }
            default:
                throw Refuse(path, at + ".type", $"{Kind(n)} is not implemented; NFC, NFKC, Prepend, Replace and Sequence are");
        }
    }

    /// <summary>
    /// A Metaspace pre-tokenizer: its replacement (one character), when it puts the prefix before a text
    /// (prepend_scheme, or the older add_prefix_space: true as always, false as never; always when neither is given),
    /// and whether it splits before each replacement (split, true when absent).
    /// </summary>
    private static MetaspaceRule Metaspace(string path, string at, JsonElement p)
    {
        string replacement = p.TryGetProperty("replacement", out JsonElement r) && r.ValueKind != JsonValueKind.Null ? String(path, p, at, "replacement") : "\u2581";
        if (replacement.Length != 1)
        {
            throw Refuse(path, at + ".replacement", $"'{Echo.Of(replacement)}' is not one character; only a one-character replacement is implemented");
        }
        if (p.TryGetProperty("str_rep", out JsonElement rep) && rep.ValueKind == JsonValueKind.String && rep.GetString() != replacement)
        {
            throw Refuse(path, at + ".str_rep", "differs from replacement");
        }
        MetaspacePrepend scheme;
        if (p.TryGetProperty("prepend_scheme", out JsonElement s) && s.ValueKind != JsonValueKind.Null)
        {
            scheme = (s.ValueKind == JsonValueKind.String ? s.GetString() : null) switch
            {
                "always" => MetaspacePrepend.Always,
                "first" => MetaspacePrepend.First,
                "never" => MetaspacePrepend.Never,
                _ => throw Refuse(path, at + ".prepend_scheme", $"{Echo.Of(s.GetRawText())} is not \"always\", \"first\" or \"never\""),
            };
        }
        else
        {
            bool hasPrefix = p.TryGetProperty("add_prefix_space", out JsonElement a) && a.ValueKind != JsonValueKind.Null;
            scheme = !hasPrefix || Bool(path, p, at + ".add_prefix_space") ? MetaspacePrepend.Always : MetaspacePrepend.Never;
        }
        bool split = !(p.TryGetProperty("split", out JsonElement sp) && sp.ValueKind != JsonValueKind.Null) || Bool(path, p, at + ".split");
        return new MetaspaceRule(replacement[0], scheme, split);
    }

    private static void PreTokenizers(string path, string at, JsonElement p, List<Regex> splits, ref bool byteLevel)
    {
        switch (Type(p))
        {
            case "Metaspace":
                throw Refuse(path, at + ".type", "\"Metaspace\" inside a Sequence is not implemented; Metaspace is read as the only pre-tokenizer");
            case "ByteLevel":
                if (p.TryGetProperty("add_prefix_space", out JsonElement prefix) && prefix.ValueKind == JsonValueKind.True)
                {
                    throw Refuse(path, at + ".add_prefix_space", "true is not implemented");
                }
                byteLevel = true;
                if (!(p.TryGetProperty("use_regex", out JsonElement useRegex) && useRegex.ValueKind == JsonValueKind.False))
                {
                    splits.Add(new Regex(@"'s|'t|'re|'ve|'m|'ll|'d| ?\p{L}+| ?\p{N}+| ?[^\s\p{L}\p{N}]+|\s+(?!\S)|\s+", RegexOptions.None, PatternTimeout));
                }
                break;
            case "Split":
            {
                if (!p.TryGetProperty("pattern", out JsonElement pattern) || pattern.ValueKind != JsonValueKind.Object)
                {
                    throw Refuse(path, at + ".pattern", "is missing");
                }
                string behavior = p.TryGetProperty("behavior", out JsonElement b) && b.ValueKind == JsonValueKind.String ? b.GetString()! : "";
                if (behavior != "Isolated")
                {
                    throw Refuse(path, at + ".behavior", $"'{Echo.Of(behavior)}' is not implemented; \"Isolated\" is");
                }
                if (p.TryGetProperty("invert", out JsonElement invert) && invert.ValueKind == JsonValueKind.True)
                {
                    throw Refuse(path, at + ".invert", "true is not implemented");
                }
                string source = pattern.TryGetProperty("Regex", out JsonElement rx) && rx.ValueKind == JsonValueKind.String ? rx.GetString()!
                    : pattern.TryGetProperty("String", out JsonElement lit) && lit.ValueKind == JsonValueKind.String ? Regex.Escape(lit.GetString()!)
                    : throw Refuse(path, at + ".pattern", "is neither {\"Regex\": …} nor {\"String\": …}");
                try
                {
                    splits.Add(new Regex(source, RegexOptions.None, PatternTimeout));
                }
                catch (ArgumentException e)
                {
                    throw Refuse(path, at + ".pattern.Regex", $"does not compile ({e.Message})");
                }
                break;
            }
            case "Sequence":
            {
                JsonElement list = Array(path, p, at, "pretokenizers");
                int i = 0;
                foreach (JsonElement item in list.EnumerateArray())
                {
                    PreTokenizers(path, $"{at}.pretokenizers[{i++}]", item, splits, ref byteLevel);
                }
                break;
            }
            default:
                throw Refuse(path, at + ".type", $"{Kind(p)} is not implemented; ByteLevel, Split, Sequence and Metaspace are");
        }
    }

    private static List<(string, int, bool, bool, bool)> AddedTokens(string path, JsonElement root, Dictionary<string, int> vocabulary)
    {
        var added = new List<(string, int, bool, bool, bool)>();
        if (!root.TryGetProperty("added_tokens", out JsonElement list) || list.ValueKind == JsonValueKind.Null)
        {
            return added;
        }
        if (list.ValueKind != JsonValueKind.Array)
        {
            throw Refuse(path, "added_tokens", "is not a list");
        }
        var ids = new HashSet<int>();
        var taken = new HashSet<int>(vocabulary.Values);
        int i = 0;
        foreach (JsonElement t in list.EnumerateArray())
        {
            string at = $"added_tokens[{i++}]";
            if (t.ValueKind != JsonValueKind.Object || !t.TryGetProperty("id", out JsonElement idEl) || !idEl.TryGetInt32(out int id) || id < 0)
            {
                throw Refuse(path, at + ".id", "is missing or not a non-negative integer");
            }
            string content = String(path, t, at, "content");
            if (content.Length == 0)
            {
                throw Refuse(path, at + ".content", "is empty");
            }
            if (!ids.Add(id))
            {
                throw Refuse(path, at + ".id", $"{id} is given to another added token too");
            }
            if (vocabulary.TryGetValue(content, out int v) && v != id)
            {
                throw Refuse(path, at + ".id", $"{id}, but model.vocab gives '{Echo.Of(content)}' the id {v}");
            }
            if (taken.Contains(id) && !(vocabulary.TryGetValue(content, out int same) && same == id))
            {
                throw Refuse(path, at + ".id", $"{id} is another token's id in model.vocab");
            }
            bool special = Bool(path, t, at + ".special");
            if (!special && Bool(path, t, at + ".normalized"))
            {
                throw Refuse(path, at + ".normalized", "true on a non-special token is not implemented (it is matched in the raw text)");
            }
            added.Add((content, id, Bool(path, t, at + ".lstrip"), Bool(path, t, at + ".rstrip"), Bool(path, t, at + ".single_word")));
        }
        return added;
    }

    /// <summary>The post-processor: none, ByteLevel, or a TemplateProcessing (alone or in a Sequence) whose single template is [special token]? then $A.</summary>
    private static int? Template(string path, JsonElement root, List<(string Content, int Id, bool, bool, bool)> added)
    {
        if (!root.TryGetProperty("post_processor", out JsonElement post) || post.ValueKind == JsonValueKind.Null)
        {
            return null;
        }
        var parts = new List<(string At, JsonElement Part)>();
        if (Type(post) == "Sequence")
        {
            int i = 0;
            foreach (JsonElement p in Array(path, post, "post_processor", "processors").EnumerateArray())
            {
                parts.Add(($"post_processor.processors[{i++}]", p));
            }
        }
        else
        {
            parts.Add(("post_processor", post));
        }
        int? start = null;
        foreach ((string at, JsonElement part) in parts)
        {
            switch (Type(part))
            {
                case "ByteLevel":
                    break;
                case "TemplateProcessing":
                {
                    JsonElement single = Array(path, part, at, "single");
                    int index = 0;
                    bool seenText = false;
                    foreach (JsonElement item in single.EnumerateArray())
                    {
                        string itemAt = $"{at}.single[{index++}]";
                        if (item.TryGetProperty("Sequence", out _))
                        {
                            seenText = true;
                            continue;
                        }
                        if (!item.TryGetProperty("SpecialToken", out JsonElement special) || seenText || start is not null)
                        {
                            throw Refuse(path, itemAt, "is not implemented: a template may put one special token before the text, nothing after it");
                        }
                        string name = String(path, special, itemAt + ".SpecialToken", "id");
                        int id = -1;
                        foreach ((string content, int addedId, _, _, _) in added)
                        {
                            if (content == name)
                            {
                                id = addedId;
                            }
                        }
                        start = id >= 0 ? id : throw Refuse(path, itemAt + ".SpecialToken.id", $"'{Echo.Of(name)}' is not an added token");
                    }
                    break;
                }
                default:
                    throw Refuse(path, at + ".type", $"{Kind(part)} is not implemented; ByteLevel, TemplateProcessing and Sequence are");
            }
        }
        return start;
    }

    private static string? Type(JsonElement e) =>
        e.ValueKind == JsonValueKind.Object && e.TryGetProperty("type", out JsonElement t) && t.ValueKind == JsonValueKind.String ? t.GetString() : null;

    private static string Kind(JsonElement e) => Type(e) is { } t ? "\"" + Echo.Of(t) + "\"" : Echo.Of(e.GetRawText());

    private static bool Bool(string path, JsonElement o, string at)
    {
        string name = at[(at.LastIndexOf('.') + 1)..];
        if (!o.TryGetProperty(name, out JsonElement e) || e.ValueKind == JsonValueKind.Null)
        {
            return false;
        }
        return e.ValueKind switch
        {
            JsonValueKind.True => true,
            JsonValueKind.False => false,
            _ => throw Refuse(path, at, $"is {Echo.Of(e.GetRawText())}; expected true or false"),
        };
    }

    private static string String(string path, JsonElement o, string at, string name) =>
        o.TryGetProperty(name, out JsonElement e) && e.ValueKind == JsonValueKind.String ? e.GetString()! : throw Refuse(path, at + "." + name, "is missing or not a string");

    private static JsonElement Array(string path, JsonElement o, string at, string name) =>
        o.TryGetProperty(name, out JsonElement e) && e.ValueKind == JsonValueKind.Array ? e : throw Refuse(path, at + "." + name, "is missing or not a list");

    private static TokenizerFileException Refuse(string path, string at, string problem) => new(path, $"{at} {problem}");

    private enum MetaspacePrepend
    {
        Always,
        First,
        Never,
    }

    private readonly record struct MetaspaceRule(char Replacement, MetaspacePrepend Scheme, bool Split);
}
