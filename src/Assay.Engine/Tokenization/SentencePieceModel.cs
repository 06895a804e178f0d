using System.Globalization;
using System.Text;
using Google.Protobuf;
using Microsoft.ML.Tokenizers;

namespace Assay.Tokenization;

/// <summary>
/// A SentencePiece model (tokenizer.model): the fields of its protobuf this engine reads, checked, and the encoder.
/// The pieces are encoded by Microsoft.ML.Tokenizers' SentencePieceTokenizer; the normalization of the identity rule
/// set is done here (the library's own differs from the reference implementation on short and whitespace-only
/// texts): with remove_extra_whitespaces, leading and trailing spaces go and runs of spaces become one; a text that
/// starts a sequence gets the dummy-prefix space when add_dummy_prefix is set; spaces become U+2581. Runs of unknown
/// pieces become one unknown id, as the reference implementation gives them.
/// </summary>
internal sealed class SentencePieceModel
{
    /// <summary>The escaped space, U+2581.</summary>
    public const char Space = '\u2581';

    private readonly SentencePieceTokenizer _tokenizer;
    private readonly Unigram? _unigram;
    private readonly bool _addDummyPrefix, _removeExtraWhitespaces;

    private SentencePieceModel(SentencePieceTokenizer tokenizer, string[] pieces, bool addDummyPrefix, bool removeExtraWhitespaces, int unknown, int bos, int eos,
        Unigram? unigram)
    {
        _tokenizer = tokenizer;
        _unigram = unigram;
        Pieces = pieces;
        _addDummyPrefix = addDummyPrefix;
        _removeExtraWhitespaces = removeExtraWhitespaces;
        UnknownId = unknown;
        BeginningOfSequenceId = bos;
        EndOfSequenceId = eos;
    }

    /// <summary>Every piece's text, by id.</summary>
    public string[] Pieces { get; }

    public int UnknownId { get; }

    /// <summary>trainer_spec.bos_id, or −1 when the model has none.</summary>
    public int BeginningOfSequenceId { get; }

    /// <summary>trainer_spec.eos_id, or −1 when the model has none.</summary>
    public int EndOfSequenceId { get; }

    /// <summary>Reads and checks a tokenizer.model; everything it does not implement is refused with the field named.</summary>
    public static SentencePieceModel Read(string path)
    {
        byte[] bytes = InputFile.ReadAllBytes(path, InputFile.TokenizerFileBytes);
        var pieces = new List<(string Piece, int Type, float Score)>();
        var trainer = new Dictionary<int, long>();
        string normalizerName = "";
        bool addDummyPrefix = true, removeExtra = true, escape = true;
        try
        {
            var input = new CodedInputStream(bytes);
            uint tag;
            while ((tag = input.ReadTag()) != 0)
            {
                switch (WireFormat.GetTagFieldNumber(tag))
                {
                    case 1:
                        pieces.Add(ReadPiece(input.ReadBytes()));
                        break;
                    case 2:
                        ReadScalars(input.ReadBytes(), trainer);
                        break;
                    case 3:
                        var normalizer = new CodedInputStream(input.ReadBytes().ToByteArray());
                        uint t;
                        while ((t = normalizer.ReadTag()) != 0)
                        {
                            switch (WireFormat.GetTagFieldNumber(t))
                            {
                                case 1: normalizerName = normalizer.ReadString(); break;
                                case 3: addDummyPrefix = normalizer.ReadBool(); break;
                                case 4: removeExtra = normalizer.ReadBool(); break;
                                case 5: escape = normalizer.ReadBool(); break;
                                default: normalizer.SkipLastField(); break;
                            }
                        }
                        break;
                    default:
                        input.SkipLastField();
                        break;
                }
            }
        }
        catch (InvalidProtocolBufferException e)
        {
            throw new TokenizerFileException(path, $"not a readable SentencePiece model ({e.Message})", e);
        }

        if (pieces.Count == 0)
        {
            throw new TokenizerFileException(path, "holds no pieces");
        }
        // Field numbers of sentencepiece_model.proto's TrainerSpec: model_type 3 (1 unigram, 2 BPE), treat_whitespace_as_suffix 24,
        // byte_fallback 35, unk_id 40, bos_id 41, eos_id 42 (defaults 1, false, false, 0, 1, 2).
        long modelType = trainer.GetValueOrDefault(3, 1);
        bool byteFallback = trainer.GetValueOrDefault(35, 0) != 0;
        if (modelType is not (1 or 2))
        {
            throw new TokenizerFileException(path, $"trainer_spec.model_type {modelType} (word or character models) is not implemented; BPE and unigram models are read");
        }
        if (trainer.GetValueOrDefault(24, 0) != 0)
        {
            throw new TokenizerFileException(path, "trainer_spec.treat_whitespace_as_suffix true is not implemented");
        }
        if (normalizerName is not ("identity" or ""))
        {
            throw new TokenizerFileException(path,
                $"normalizer_spec.name '{Echo.Of(normalizerName)}' (its precompiled normalization rules) is not implemented; models with the identity rules are read");
        }
        if (!escape)
        {
            throw new TokenizerFileException(path, "normalizer_spec.escape_whitespaces false is not implemented");
        }
        var ids = new Dictionary<string, int>(StringComparer.Ordinal);
        for (int i = 0; i < pieces.Count; i++)
        {
            (string piece, int type, _) = pieces[i];
            if (!ids.TryAdd(piece, i))
            {
                throw new TokenizerFileException(path, $"piece {i} '{Echo.Of(piece)}' repeats piece {ids[piece]}");
            }
            if (type == 6 && !(piece.Length == 6 && piece.StartsWith("<0x", StringComparison.Ordinal) && piece[5] == '>'
                && Uri.IsHexDigit(piece[3]) && Uri.IsHexDigit(piece[4])))
            {
                throw new TokenizerFileException(path, $"piece {i} '{Echo.Of(piece)}' is of the byte type (6) but not named <0xNN>");
            }
            if (type == 4)
            {
                throw new TokenizerFileException(path, $"piece {i} '{Echo.Of(piece)}' is user-defined (type 4), which is not implemented");
            }
        }
        if (byteFallback)
        {
            for (int b = 0; b < 256; b++)
            {
                string name = string.Create(CultureInfo.InvariantCulture, $"<0x{b:X2}>");
                if (!ids.TryGetValue(name, out int id) || pieces[id].Type != 6)
                {
                    throw new TokenizerFileException(path, $"trainer_spec.byte_fallback is on but the byte piece {name} is {(ids.ContainsKey(name) ? "not of the byte type" : "missing")}");
                }
            }
        }
        int unknown = Id(path, trainer, 40, 0, pieces.Count, "unk_id");
        int bos = Id(path, trainer, 41, 1, pieces.Count, "bos_id");
        int eos = Id(path, trainer, 42, 2, pieces.Count, "eos_id");
        // The special pieces must be of their kinds (unknown 2, control 3), as the trainer writes them; the encoder
        // library reads out of bounds on a model whose unknown piece is missing.
        if (unknown < 0 || pieces[unknown].Type != 2 || pieces.Count(p => p.Type == 2) != 1)
        {
            throw new TokenizerFileException(path, string.Create(CultureInfo.InvariantCulture,
                $"trainer_spec.unk_id {unknown} is not the model's one unknown piece (type 2); {pieces.Count(p => p.Type == 2)} pieces are of that type"));
        }
        foreach ((int id, string name) in new[] { (bos, "bos_id"), (eos, "eos_id") })
        {
            if (id >= 0 && pieces[id].Type != 3)
            {
                throw new TokenizerFileException(path, string.Create(CultureInfo.InvariantCulture,
                    $"trainer_spec.{name} {id} is piece '{Echo.Of(pieces[id].Piece)}' of type {pieces[id].Type}, not a control piece (type 3)"));
            }
        }

        SentencePieceTokenizer tokenizer;
        try
        {
            using var stream = new MemoryStream(bytes, writable: false);
            tokenizer = SentencePieceTokenizer.Create(stream, false, false);
        }
        catch (Exception e) when (e is ArgumentException or InvalidOperationException or FormatException or InvalidProtocolBufferException)
        {
            throw new TokenizerFileException(path, $"the encoder library refuses the model ({e.Message})", e);
        }
        // Unigram models are encoded here (the library's unigram path fails on byte fallback); BPE by the library.
        Unigram? unigram = modelType == 1 ? new Unigram([.. pieces], unknown, byteFallback) : null;
        return new SentencePieceModel(tokenizer, [.. pieces.Select(p => p.Piece)], addDummyPrefix, removeExtra, unknown, bos, eos, unigram);
    }

    /// <summary>
    /// Ids of already normalized text (see <see cref="Normalize"/>), a run of unknown pieces as one unknown id; where
    /// <paramref name="ranges"/> is given, each token's range in the normalized text (<paramref name="offset"/> on).
    /// </summary>
    public void EncodeNormalized(ReadOnlySpan<char> normalized, int offset, List<int> ids, List<(int, int)>? ranges)
    {
        if (normalized.IsEmpty)
        {
            return;
        }
        if (_unigram is not null)
        {
            _unigram.Encode(normalized, offset, ids, ranges);
            return;
        }
        if (ranges is null)
        {
            foreach (int id in _tokenizer.EncodeToIds(normalized, false, false, true, false))
            {
                if (id != UnknownId || ids.Count == 0 || ids[^1] != UnknownId)
                {
                    ids.Add(id);
                }
            }
            return;
        }
        foreach (EncodedToken t in _tokenizer.EncodeToTokens(normalized, out _, false, false, true, false))
        {
            (int a, int b) = (offset + t.Offset.Start.GetOffset(normalized.Length), offset + t.Offset.End.GetOffset(normalized.Length));
            if (t.Id == UnknownId && ids.Count > 0 && ids[^1] == UnknownId)
            {
                ranges[^1] = (ranges[^1].Item1, b);
                continue;
            }
            ids.Add(t.Id);
            ranges.Add((a, b));
        }
    }

    /// <summary>
    /// The text the pieces are matched on: extra spaces removed when the model says so, the dummy-prefix space unless
    /// <paramref name="continuation"/> (a piece laid after others in the same sequence), spaces as U+2581. Where
    /// <paramref name="origin"/> is given, it gets each normalized character's index in <paramref name="text"/> (−1 for the dummy prefix).
    /// </summary>
    public string Normalize(string text, bool continuation, List<int>? origin = null)
    {
        var kept = new List<int>(text.Length);
        int first = 0, last = text.Length;
        if (_removeExtraWhitespaces)
        {
            while (first < last && text[first] == ' ')
            {
                first++;
            }
            while (last > first && text[last - 1] == ' ')
            {
                last--;
            }
            // A continuation keeps one leading space: in running text the space before it is inside the text.
            if (continuation && first > 0 && first < last)
            {
                kept.Add(first - 1);
            }
            for (int i = first; i < last; i++)
            {
                if (text[i] != ' ' || text[i - 1] != ' ')
                {
                    kept.Add(i);
                }
            }
        }
        else
        {
            for (int i = 0; i < text.Length; i++)
            {
                kept.Add(i);
            }
        }
        if (kept.Count == 0)
        {
            return "";
        }
        var sb = new StringBuilder(kept.Count + 1);
        if (_addDummyPrefix && !continuation)
        {
            sb.Append(Space);
            origin?.Add(-1);
        }
        foreach (int i in kept)
        {
            sb.Append(text[i] == ' ' ? Space : text[i]);
            origin?.Add(i);
        }
        return sb.ToString();
    }

    public string Decode(IEnumerable<int> ids) => _tokenizer.Decode(ids) ?? string.Empty;

    private static (string, int, float) ReadPiece(ByteString message)
    {
        var input = new CodedInputStream(message.ToByteArray());
        string piece = "";
        int type = 1;
        float score = 0;
        uint tag;
        while ((tag = input.ReadTag()) != 0)
        {
            switch (WireFormat.GetTagFieldNumber(tag))
            {
                case 1: piece = input.ReadString(); break;
                case 2: score = input.ReadFloat(); break;
                case 3: type = input.ReadEnum(); break;
                default: input.SkipLastField(); break;
            }
        }
        return (piece, type, score);
    }

    /// <summary>
    /// Unigram segmentation as the reference implementation defines it: the path through the normalized text whose
    /// pieces' scores (float32) sum highest, normal pieces only; where no piece covers a character, that character is an
    /// unknown piece scored 10 below the lowest normal piece; ties go to the path found first (earlier starts, then
    /// shorter pieces); runs of unknown pieces are one, and under byte fallback an unknown piece becomes the
    /// &lt;0xNN&gt; pieces of its UTF-8 bytes.
    /// </summary>
    private sealed class Unigram
    {
        private const float UnknownPenalty = 10f;
        private readonly Dictionary<string, (int Id, float Score)> _normal = new(StringComparer.Ordinal);
        private readonly int _longest, _unknown;
        private readonly float _unknownScore;
        private readonly int[]? _bytes;

        public Unigram((string Piece, int Type, float Score)[] pieces, int unknown, bool byteFallback)
        {
            float min = float.MaxValue;
            for (int i = 0; i < pieces.Length; i++)
            {
                if (pieces[i].Type == 1 && pieces[i].Piece.Length > 0)
                {
                    _normal[pieces[i].Piece] = (i, pieces[i].Score);
                    _longest = Math.Max(_longest, pieces[i].Piece.Length);
                    min = Math.Min(min, pieces[i].Score);
                }
            }
            _unknown = unknown;
            _unknownScore = (_normal.Count == 0 ? 0 : min) - UnknownPenalty;
            if (byteFallback)
            {
                _bytes = new int[256];
                for (int i = 0; i < pieces.Length; i++)
                {
                    if (pieces[i].Type == 6)
                    {
                        _bytes[Convert.ToInt32(pieces[i].Piece[3..5], 16)] = i;
                    }
                }
            }
        }

        public void Encode(ReadOnlySpan<char> text, int offset, List<int> ids, List<(int, int)>? ranges)
        {
            int n = text.Length;
            var best = new float[n + 1];
            var from = new int[n + 1];
            var piece = new int[n + 1];
            Array.Fill(from, -1);
            for (int start = 0; start < n; start++)
            {
                if (start > 0 && from[start] < 0)
                {
                    continue;   // inside a surrogate pair
                }
                int one = char.IsHighSurrogate(text[start]) && start + 1 < n && char.IsLowSurrogate(text[start + 1]) ? 2 : 1;
                bool single = false;
                string window = text.Slice(start, Math.Min(_longest, n - start)).ToString();
                for (int length = 1; length <= window.Length; length++)
                {
                    if (_normal.TryGetValue(window[..length], out (int Id, float Score) p))
                    {
                        single |= length == one;
                        Relax(start, start + length, p.Id, p.Score);
                    }
                }
                if (!single)
                {
                    Relax(start, start + one, _unknown, _unknownScore);
                }
            }

            void Relax(int start, int end, int id, float score)
            {
                float candidate = best[start] + score;
                if (from[end] < 0 || candidate > best[end])
                {
                    (best[end], from[end], piece[end]) = (candidate, start, id);
                }
            }

            var path = new List<(int Id, int Start, int End)>();
            for (int end = n; end > 0; end = from[end])
            {
                path.Add((piece[end], from[end], end));
            }
            path.Reverse();
            foreach ((int id, int a, int b) in path)
            {
                if (id == _unknown && _bytes is not null)
                {
                    foreach (byte x in Encoding.UTF8.GetBytes(text[a..b].ToString()))
                    {
                        ids.Add(_bytes[x]);
                        ranges?.Add((offset + a, offset + b));
                    }
                    continue;
                }
                if (id == _unknown && ids.Count > 0 && ids[^1] == _unknown)
                {
                    if (ranges is not null)
                    {
                        ranges[^1] = (ranges[^1].Item1, offset + b);
                    }
                    continue;
                }
                ids.Add(id);
                ranges?.Add((offset + a, offset + b));
            }
        }
    }

    /// <summary>The varint fields of a message (the trainer spec's ids, flags and model type); other fields skipped.</summary>
    private static void ReadScalars(ByteString message, Dictionary<int, long> fields)
    {
        var input = new CodedInputStream(message.ToByteArray());
        uint tag;
        while ((tag = input.ReadTag()) != 0)
        {
            if (WireFormat.GetTagWireType(tag) == WireFormat.WireType.Varint)
            {
                fields[WireFormat.GetTagFieldNumber(tag)] = input.ReadInt64();
            }
            else
            {
                input.SkipLastField();
            }
        }
    }

    private static int Id(string path, Dictionary<int, long> trainer, int field, int fallback, int count, string name)
    {
        long id = trainer.GetValueOrDefault(field, fallback);
        if (id < -1 || id >= count)
        {
            throw new TokenizerFileException(path, string.Create(CultureInfo.InvariantCulture, $"trainer_spec.{name} {id} is outside the {count} pieces"));
        }
        return (int)id;
    }
}
