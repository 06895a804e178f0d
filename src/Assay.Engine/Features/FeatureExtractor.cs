using System.Buffers;
using System.Diagnostics;
using System.Globalization;
using System.Runtime.CompilerServices;
using Assay.Model;
using Assay.Tokenization;

namespace Assay.Features;

/// <summary>
/// Runs an opened model over texts and computes the requested features of each. Texts are taken in groups, sorted
/// by length inside a group and batched under a token budget without padding; rows come out in input order. Every
/// row's values depend only on its own text (the kernels compute each row alone, in a fixed order), so batching,
/// grouping and thread count never change a bit. One extractor may be used from several threads at once.
/// </summary>
public sealed class FeatureExtractor
{
    /// <summary>Texts per group: the window inside which rows are sorted by length.</summary>
    internal const int GroupRows = 256;

    /// <summary>Logit rows projected through the output head at once (bounds the V-wide scratch).</summary>
    private const int HeadRowsPerSlice = 64;

    private readonly LanguageModel _model;
    private readonly ExtractionOptions _options;
    private readonly int[][] _before;
    private readonly int[][] _after;
    private readonly int[] _start;
    private readonly string _textPrefix;
    private readonly int _promptTokens;
    private readonly FeatureStep[] _steps;
    private readonly int[] _layersToKeep;
    private readonly bool _needsDistribution;
    private readonly List<Continuation> _continuations = [];
    private readonly int _finalLayer;

    /// <summary>Prepares an extraction: binds every feature kind (tokenizing the prompt, words and candidates) and checks they fit.</summary>
    /// <exception cref="ArgumentException">A layer out of range, a {mark} pooling without a {mark}, an empty word list,
    /// a word or candidate with no tokens, two features with the same output, or a prompt too long for the context.</exception>
    public FeatureExtractor(LanguageModel model, ExtractionOptions options)
    {
        ArgumentNullException.ThrowIfNull(model);
        ArgumentNullException.ThrowIfNull(options);
        _model = model;
        _options = options;

        var tok = model.Tokenizer;
        _finalLayer = model.Config.Layers;
        _start = tok.SequenceStart(options.BeginningOfSequence);
        (_before, _textPrefix, _after) = EncodePrompt(tok, options.Prompt);
        _promptTokens = _start.Length + _before.Sum(p => p.Length) + _after.Sum(p => p.Length);

        var outputs = new List<FeatureOutput>();
        var steps = new List<FeatureStep>();
        var binding = new FeatureBinding(model, options);
        foreach (FeatureRequest request in options.Features)
        {
            IReadOnlyList<FeatureOutput> own = request.Outputs(ModelShape.Of(model.Config));
            FeatureStep step = request.Bind(binding, outputs.Count);
            outputs.AddRange(own);
            for (int c = 0; c < step.Continuations.Count; c++)
            {
                _continuations.Add(new Continuation(step.Continuations[c], step, c));
            }
            steps.Add(step);
        }

        string? duplicate = outputs.GroupBy(o => o.Name, StringComparer.Ordinal).FirstOrDefault(g => g.Count() > 1)?.Key;
        if (duplicate != null)
        {
            throw new ArgumentException($"two features write the output {duplicate}; ask for each once", nameof(options));
        }
        _steps = [.. steps];
        _needsDistribution = _steps.Any(s => s.NeedsDistribution);
        var keep = new SortedSet<int>(_steps.SelectMany(s => s.Layers));
        if (_needsDistribution || _continuations.Count > 0)
        {
            keep.Add(_finalLayer);
        }
        _layersToKeep = [.. keep];
        Outputs = outputs;

        int longestCandidate = _continuations.Count == 0 ? 0 : _continuations.Max(c => c.Ids.Length);
        TextTokenLimit = model.Config.ContextLength - _promptTokens - longestCandidate;
        if (TextTokenLimit < 1)
        {
            throw new ArgumentException(string.Create(CultureInfo.InvariantCulture,
                $"the prompt takes {_promptTokens} tokens and the longest word or completion {longestCandidate}; with the context of {model.Config.ContextLength} no token is left for the text"),
                nameof(options));
        }
    }

    /// <summary>The arrays each row fills, in order.</summary>
    public IReadOnlyList<FeatureOutput> Outputs { get; }

    /// <summary>The most text tokens a row keeps: the context less the prompt and the longest word or completion.</summary>
    public int TextTokenLimit { get; }

    /// <summary>Tokens the prompt adds to every text (the beginning-of-sequence token included, when one is added).</summary>
    public int PromptTokens => _promptTokens;

    /// <summary>What every sequence starts with: the beginning-of-sequence token, or nothing.</summary>
    public IReadOnlyList<int> StartTokens => _start;

    /// <summary>Features of each text, in input order, computed group by group as the texts are read.</summary>
    /// <exception cref="ArgumentException">A text is null or empty (the message gives its index).</exception>
    public IEnumerable<FeatureRow> Extract(IEnumerable<string> texts, IProgress<ExtractionProgress>? progress = null,
        CancellationToken cancellationToken = default)
    {
        ArgumentNullException.ThrowIfNull(texts);
        return Iterate(texts, progress, cancellationToken);
    }

    /// <summary>Features of each text of an asynchronous stream, in input order.</summary>
    /// <exception cref="ArgumentException">A text is null or empty (the message gives its index).</exception>
    public async IAsyncEnumerable<FeatureRow> ExtractAsync(IAsyncEnumerable<string> texts,
        IProgress<ExtractionProgress>? progress = null, [EnumeratorCancellation] CancellationToken cancellationToken = default)
    {
        ArgumentNullException.ThrowIfNull(texts);
        var tracker = new ProgressTracker(progress);
        var group = new List<string>(GroupRows);
        long first = 0;
        await foreach (string text in texts.WithCancellation(cancellationToken).ConfigureAwait(false))
        {
            group.Add(text);
            if (group.Count == GroupRows)
            {
                foreach (FeatureRow row in ExtractGroup(group, first, tracker, cancellationToken))
                {
                    yield return row;
                }
                first += group.Count;
                group.Clear();
            }
        }
        foreach (FeatureRow row in ExtractGroup(group, first, tracker, cancellationToken))
        {
            yield return row;
        }
    }

    private IEnumerable<FeatureRow> Iterate(IEnumerable<string> texts, IProgress<ExtractionProgress>? progress, CancellationToken ct)
    {
        var tracker = new ProgressTracker(progress);
        long first = 0;
        foreach (string[] group in texts.Chunk(GroupRows))
        {
            foreach (FeatureRow row in ExtractGroup(group, first, tracker, ct))
            {
                yield return row;
            }
            first += group.Length;
        }
    }

    /// <summary>Features of consecutive texts whose first has index <paramref name="firstIndex"/>.</summary>
    internal FeatureRow[] ExtractGroup(IReadOnlyList<string> texts, long firstIndex, ProgressTracker tracker, CancellationToken ct)
    {
        ct.ThrowIfCancellationRequested();
        int count = texts.Count;
        var rows = new PreparedRow[count];
        for (int i = 0; i < count; i++)
        {
            string? text = texts[i];
            if (string.IsNullOrEmpty(text))
            {
                throw new ArgumentException(string.Create(CultureInfo.InvariantCulture, $"text {firstIndex + i} is {(text == null ? "null" : "empty")}"), nameof(texts));
            }
            rows[i] = Prepare(text);
        }

        float[]?[][] values = new float[]?[count][];
        int[]?[][] ids = new int[]?[count][];
        for (int i = 0; i < count; i++)
        {
            values[i] = new float[]?[Outputs.Count];
            ids[i] = new int[]?[Outputs.Count];
            for (int o = 0; o < Outputs.Count; o++)
            {
                if (Outputs[o].Element == FeatureElement.TokenId)
                {
                    ids[i][o] = new int[Outputs[o].Width];
                }
                else
                {
                    values[i][o] = new float[Outputs[o].Width];
                }
            }
        }

        // One job per forward sequence: the filled template, and the template followed by each candidate.
        var jobs = new List<Job>(count * (1 + _continuations.Count));
        for (int i = 0; i < count; i++)
        {
            jobs.Add(new Job(i, -1, rows[i].Tokens.Length));
            for (int c = 0; c < _continuations.Count; c++)
            {
                jobs.Add(new Job(i, c, rows[i].Tokens.Length + _continuations[c].Ids.Length));
            }
        }
        jobs.Sort(static (a, b) => a.Length != b.Length ? a.Length.CompareTo(b.Length)
            : a.Row != b.Row ? a.Row.CompareTo(b.Row) : a.Candidate.CompareTo(b.Candidate));

        int start = 0;
        while (start < jobs.Count)
        {
            ct.ThrowIfCancellationRequested();
            int end = start, tokens = 0;
            while (end < jobs.Count && (end == start || tokens + jobs[end].Length <= _options.TokenBudget))
            {
                tokens += jobs[end].Length;
                end++;
            }
            try
            {
                RunBatch(jobs, start, end, rows, values, ids);
            }
            catch (NonFiniteValueException e) when (e.Text == null)
            {
                throw e.InText(firstIndex + jobs[start + e.Sequence].Row);
            }
            int finished = 0;
            for (int j = start; j < end; j++)
            {
                finished += jobs[j].Candidate < 0 ? 1 : 0;
            }
            tracker.Add(finished, tokens);
            start = end;
        }

        var result = new FeatureRow[count];
        for (int i = 0; i < count; i++)
        {
            result[i] = new FeatureRow(firstIndex + i, rows[i].Tokens.Length, rows[i].Truncated, values[i], ids[i]);
        }
        return result;
    }

    private void RunBatch(List<Job> jobs, int start, int end, PreparedRow[] rows, float[]?[][] values, int[]?[][] ids)
    {
        var sequences = new int[end - start][];
        for (int j = start; j < end; j++)
        {
            Job job = jobs[j];
            int[] prefix = rows[job.Row].Tokens;
            sequences[j - start] = job.Candidate < 0 ? prefix : [.. prefix, .. _continuations[job.Candidate].Ids];
        }
        ForwardResult r = _model.Forward(sequences, new ForwardOptions
        {
            HiddenLayers = _layersToKeep,
            Logits = LogitPositions.None,
            MaxThreads = _options.MaxThreads,
        });

        var headRows = new List<HeadRow>();
        for (int j = start; j < end; j++)
        {
            Job job = jobs[j];
            int s = j - start;
            if (job.Candidate < 0)
            {
                var outputs = new RowOutputs(values[job.Row], ids[job.Row]);
                foreach (FeatureStep step in _steps)
                {
                    step.FromHidden(r, s, rows[job.Row], outputs);
                }
                if (_needsDistribution)
                {
                    headRows.Add(new HeadRow(s, r.Length(s) - 1, job.Row, -1, 0));
                }
            }
            else
            {
                int[] cand = _continuations[job.Candidate].Ids;
                int prefix = rows[job.Row].Tokens.Length;
                for (int t = 0; t < cand.Length; t++)
                {
                    headRows.Add(new HeadRow(s, prefix - 1 + t, job.Row, job.Candidate, cand[t]));
                }
            }
        }
        HeadFeatures(r, headRows, values, ids);
    }

    /// <summary>
    /// Sends the final hidden states of the rows that need the output head through it, a slice at a time, and turns
    /// each logits row into what it feeds: a next-word distribution for the steps, or one term of a continuation's
    /// log-likelihood.
    /// </summary>
    private void HeadFeatures(ForwardResult r, List<HeadRow> headRows, float[]?[][] values, int[]?[][] ids)
    {
        if (headRows.Count == 0)
        {
            return;
        }
        int d = _model.Config.Width, v = _model.Config.VocabularySize;
        int slice = Math.Min(HeadRowsPerSlice, headRows.Count);
        float[] normed = new float[slice * d];
        // The slice's logits (then distributions) are the largest buffer of a batch: pooled, so a long run reuses it.
        float[] logits = ArrayPool<float>.Shared.Rent(slice * v);
        try
        {
            HeadSlices(r, headRows, values, ids, slice, normed, logits);
        }
        finally
        {
            ArrayPool<float>.Shared.Return(logits);
        }
    }

    private void HeadSlices(ForwardResult r, List<HeadRow> headRows, float[]?[][] values, int[]?[][] ids, int slice,
        float[] normed, float[] logits)
    {
        int d = _model.Config.Width, v = _model.Config.VocabularySize;
        OutputHead head = _model.Head;
        var parallel = new ForwardOptions { MaxThreads = _options.MaxThreads }.Parallelism;
        for (int first = 0; first < headRows.Count; first += slice)
        {
            int n = Math.Min(slice, headRows.Count - first);
            for (int i = 0; i < n; i++)
            {
                HeadRow h = headRows[first + i];
                r.HiddenState(_finalLayer, h.Sequence, h.Position).CopyTo(normed.AsSpan(i * d, d));
            }
            head.Logits(normed, n, logits, parallel);
            NonFiniteValueException.CheckRows(logits.AsSpan(0, n * v), v, i => (headRows[first + i].Sequence, headRows[first + i].Position), _model.Folder);

            // Next-word rows become distributions in place; continuation rows give log p(token).
            var mainRows = new List<int>();
            for (int i = 0; i < n; i++)
            {
                HeadRow h = headRows[first + i];
                Span<float> x = logits.AsSpan(i * v, v);
                if (h.Candidate < 0)
                {
                    OutputHead.Softmax(x);
                    mainRows.Add(i);
                }
                else
                {
                    Continuation c = _continuations[h.Candidate];
                    c.Owner.AddLogProbability(c.Column, OutputHead.LogProbability(x, h.Token), new RowOutputs(values[h.Row], ids[h.Row]));
                }
            }

            if (mainRows.Count > 0)
            {
                // Distributions of this slice laid end to end (they already are when every row is a next-word row).
                float[] p = mainRows.Count == n ? logits : Gather(logits, mainRows, v);
                var outputs = new RowOutputs[mainRows.Count];
                for (int m = 0; m < mainRows.Count; m++)
                {
                    int row = headRows[first + mainRows[m]].Row;
                    outputs[m] = new RowOutputs(values[row], ids[row]);
                }
                foreach (FeatureStep step in _steps)
                {
                    if (step.NeedsDistribution)
                    {
                        step.FromDistributions(p, mainRows.Count, outputs, head, parallel);
                    }
                }
            }
        }
    }

    private static float[] Gather(float[] source, List<int> rows, int width)
    {
        float[] result = new float[(long)rows.Count * width];
        for (int i = 0; i < rows.Count; i++)
        {
            source.AsSpan(rows[i] * width, width).CopyTo(result.AsSpan(i * width, width));
        }
        return result;
    }

    /// <summary>
    /// The prompt's pieces, each tokenized alone. Under a SentencePiece tokenizer only the sequence's first piece gets
    /// the dummy-prefix space, and the spaces that end a piece before the text move to the start of the piece after it
    /// (the text, or the next piece), so "Q: {text}" gives ▁Q: ▁a ▁lamp as running text does; byte-level BPE takes the
    /// pieces exactly as written. Returns the pieces before the text, the spaces the text is prefixed with, and the pieces after it.
    /// </summary>
    private static (int[][] Before, string TextPrefix, int[][] After) EncodePrompt(TextTokenizer tok, PromptTemplate prompt)
    {
        if (!tok.IsSentencePiece)
        {
            return ([.. prompt.Before.Select(tok.Encode)], "", [.. prompt.After.Select(tok.Encode)]);
        }
        string carry = "";
        var before = new int[prompt.Before.Count][];
        for (int i = 0; i < before.Length; i++)
        {
            string piece = carry + prompt.Before[i];
            string kept = piece.TrimEnd(' ');
            carry = piece[kept.Length..];
            before[i] = i == 0 ? tok.Encode(kept) : tok.EncodeContinuation(kept);
        }
        return (before, carry, [.. prompt.After.Select(tok.EncodeContinuation)]);
    }

    private PreparedRow Prepare(string text)
    {
        TextTokenizer tok = _model.Tokenizer;
        int[] textIds = tok.IsSentencePiece && _before.Length > 0 ? tok.EncodeContinuation(_textPrefix + text) : tok.Encode(text);
        int truncated = Math.Max(0, textIds.Length - TextTokenLimit);
        if (truncated > 0)
        {
            textIds = _options.Truncation == TextTruncation.KeepHead ? textIds[..TextTokenLimit] : textIds[truncated..];
        }

        var tokens = new List<int>(_promptTokens + textIds.Length);
        tokens.AddRange(_start);
        int piece = 0, mark = -1, markIndex = _options.Prompt.MarkIndex;
        void Append(int[] ids)
        {
            tokens.AddRange(ids);
            piece++;
            if (piece == markIndex)
            {
                mark = tokens.Count - 1;
            }
        }
        foreach (int[] p in _before)
        {
            Append(p);
        }
        Append(textIds);
        foreach (int[] p in _after)
        {
            Append(p);
        }
        Debug.Assert(markIndex < 0 || mark >= 0);
        return new PreparedRow([.. tokens], truncated, mark);
    }

    private readonly record struct Job(int Row, int Candidate, int Length);

    private readonly record struct HeadRow(int Sequence, int Position, int Row, int Candidate, int Token);

    /// <summary>A continuation to score after every row: its tokens, and the step and column its log-likelihood goes to.</summary>
    private sealed record Continuation(int[] Ids, FeatureStep Owner, int Column);
}
