using System.Buffers;
using System.Diagnostics;
using System.Globalization;
using System.Numerics.Tensors;
using System.Runtime.CompilerServices;
using Assay.Kernels;
using Assay.Model;

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
    private readonly int _promptTokens;
    private readonly int[] _layersToKeep;
    private readonly bool _needsNextWord;
    private readonly List<Candidate> _candidates = [];
    private readonly int[]? _firstTokens;     // per word of a WordListFeature: the id whose probability is read
    private readonly int _finalLayer;

    /// <summary>Prepares an extraction: tokenizes the prompt and every word and candidate, and checks they fit.</summary>
    /// <exception cref="ArgumentException">A layer out of range, a {mark} pooling without a {mark}, an empty word list,
    /// a word or candidate with no tokens, two features with the same output, or a prompt too long for the context.</exception>
    public FeatureExtractor(LanguageModel model, ExtractionOptions options)
    {
        ArgumentNullException.ThrowIfNull(model);
        ArgumentNullException.ThrowIfNull(options);
        _model = model;
        _options = options;
        if (options.TokenBudget < 1)
        {
            throw new ArgumentException($"token budget {options.TokenBudget}: expected a positive number of tokens", nameof(options));
        }
        if (options.MaxThreads < 0)
        {
            throw new ArgumentException($"threads {options.MaxThreads}: expected 0 (all cores) or a positive count", nameof(options));
        }
        if (options.Features.Count == 0)
        {
            throw new ArgumentException("no features requested", nameof(options));
        }

        var tok = model.Tokenizer;
        int layers = model.Config.Layers;
        _finalLayer = layers;
        _before = options.Prompt.Before.Select(tok.Encode).ToArray();
        _after = options.Prompt.After.Select(tok.Encode).ToArray();
        _promptTokens = _before.Sum(p => p.Length) + _after.Sum(p => p.Length);

        var outputs = new List<FeatureOutput>();
        var keep = new SortedSet<int>();
        int d = model.Config.Width, v = model.Config.VocabularySize;
        foreach (FeatureRequest request in options.Features)
        {
            switch (request)
            {
                case HiddenStateFeature h:
                {
                    int layer = h.Layer < 0 ? layers + 1 + h.Layer : h.Layer;
                    if (layer < 0 || layer > layers)
                    {
                        throw new ArgumentException($"hidden layer {h.Layer}: this model has layers 0 … {layers} (or −1 … −{layers + 1} from the end)", nameof(options));
                    }
                    if (h.Pooling == HiddenPooling.Marked && !options.Prompt.HasMark)
                    {
                        throw new ArgumentException($"{h.Spec} reads the token before {{mark}}, but the prompt \"{options.Prompt.Source}\" has no {{mark}}", nameof(options));
                    }
                    keep.Add(layer);
                    outputs.Add(new FeatureOutput(string.Create(CultureInfo.InvariantCulture,
                        $"hidden.layer{layer}.{HiddenStateFeature.PoolingName(h.Pooling)}"), d, FeatureElement.Real, h));
                    break;
                }
                case NextWordFeature n:
                    _needsNextWord = true;
                    outputs.Add(new FeatureOutput("nextword", v, FeatureElement.Real, n));
                    break;
                case TopTokensFeature t:
                {
                    if (t.Count < 1 || t.Count > v)
                    {
                        throw new ArgumentException($"topk:{t.Count}: expected 1 … {v} (the vocabulary)", nameof(options));
                    }
                    _needsNextWord = true;
                    string name = string.Create(CultureInfo.InvariantCulture, $"topk{t.Count}");
                    outputs.Add(new FeatureOutput(name + ".ids", t.Count, FeatureElement.TokenId, t));
                    outputs.Add(new FeatureOutput(name + ".probs", t.Count, FeatureElement.Real, t));
                    break;
                }
                case WordListFeature w:
                {
                    if (_firstTokens != null)
                    {
                        throw new ArgumentException("one word list per extraction: give words or words-loglik, not both", nameof(options));
                    }
                    int[][] ids = EncodeAll(w.Words, "word");
                    _firstTokens = ids.Select(x => x[0]).ToArray();
                    _needsNextWord = true;
                    outputs.Add(new FeatureOutput("words.first", ids.Length, FeatureElement.Real, w));
                    if (w.FullLogLikelihood)
                    {
                        int output = outputs.Count;
                        outputs.Add(new FeatureOutput("words.loglik", ids.Length, FeatureElement.Real, w));
                        AddCandidates(ids, output);
                    }
                    break;
                }
                case ConditionalMeanFeature c:
                    _needsNextWord = true;
                    outputs.Add(new FeatureOutput("cmean", d, FeatureElement.Real, c));
                    break;
                case CompletionFeature c:
                {
                    int[][] ids = EncodeAll(c.Candidates, "candidate completion");
                    int output = outputs.Count;
                    outputs.Add(new FeatureOutput("completions.loglik", ids.Length, FeatureElement.Real, c));
                    AddCandidates(ids, output);
                    break;
                }
                default:
                    throw new ArgumentException($"unknown feature request {request.GetType().Name}", nameof(options));
            }
        }

        string? duplicate = outputs.GroupBy(o => o.Name, StringComparer.Ordinal).FirstOrDefault(g => g.Count() > 1)?.Key;
        if (duplicate != null)
        {
            throw new ArgumentException($"two features write the output {duplicate}; ask for each once", nameof(options));
        }
        if (_needsNextWord || _candidates.Count > 0)
        {
            keep.Add(_finalLayer);
        }
        _layersToKeep = [.. keep];
        Outputs = outputs;

        int longestCandidate = _candidates.Count == 0 ? 0 : _candidates.Max(c => c.Ids.Length);
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

    /// <summary>Tokens the prompt adds to every text.</summary>
    public int PromptTokens => _promptTokens;

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
        var jobs = new List<Job>(count * (1 + _candidates.Count));
        for (int i = 0; i < count; i++)
        {
            jobs.Add(new Job(i, -1, rows[i].Tokens.Length));
            for (int c = 0; c < _candidates.Count; c++)
            {
                jobs.Add(new Job(i, c, rows[i].Tokens.Length + _candidates[c].Ids.Length));
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
            RunBatch(jobs, start, end, rows, values, ids);
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
            sequences[j - start] = job.Candidate < 0 ? prefix : [.. prefix, .. _candidates[job.Candidate].Ids];
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
                HiddenFeatures(r, s, rows[job.Row], values[job.Row]);
                if (_needsNextWord)
                {
                    headRows.Add(new HeadRow(s, r.Length(s) - 1, job.Row, -1, 0));
                }
            }
            else
            {
                int[] cand = _candidates[job.Candidate].Ids;
                int prefix = rows[job.Row].Tokens.Length;
                for (int t = 0; t < cand.Length; t++)
                {
                    headRows.Add(new HeadRow(s, prefix - 1 + t, job.Row, job.Candidate, cand[t]));
                }
            }
        }
        HeadFeatures(r, headRows, values, ids);
    }

    private void HiddenFeatures(ForwardResult r, int s, PreparedRow row, float[]?[] values)
    {
        for (int o = 0; o < Outputs.Count; o++)
        {
            if (Outputs[o].Request is not HiddenStateFeature h)
            {
                continue;
            }
            int layer = h.Layer < 0 ? _finalLayer + 1 + h.Layer : h.Layer;
            Span<float> dst = values[o];
            switch (h.Pooling)
            {
                case HiddenPooling.LastToken:
                    r.HiddenState(layer, s, r.Length(s) - 1).CopyTo(dst);
                    break;
                case HiddenPooling.Marked:
                    r.HiddenState(layer, s, row.MarkPosition).CopyTo(dst);
                    break;
                default:
                {
                    dst.Clear();
                    int length = r.Length(s);
                    for (int t = 0; t < length; t++)
                    {
                        TensorPrimitives.Add(dst, r.HiddenState(layer, s, t), dst);
                    }
                    TensorPrimitives.Multiply(dst, 1f / length, dst);
                    break;
                }
            }
        }
    }

    /// <summary>
    /// Sends the final hidden states of the rows that need the output head through it, a slice at a time, and turns
    /// each logits row into what it feeds: the next-word features, or one term of a candidate's log-likelihood.
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
        float[] cmeanOut = new float[slice * d];
        int cmeanOutput = IndexOf<ConditionalMeanFeature>();
        try
        {
            HeadSlices(r, headRows, values, ids, slice, normed, logits, cmeanOut, cmeanOutput);
        }
        finally
        {
            ArrayPool<float>.Shared.Return(logits);
        }
    }

    private void HeadSlices(ForwardResult r, List<HeadRow> headRows, float[]?[][] values, int[]?[][] ids, int slice,
        float[] normed, float[] logits, float[] cmeanOut, int cmeanOutput)
    {
        int d = _model.Config.Width, v = _model.Config.VocabularySize;
        ModelWeights weights = _model.Weights;
        KernelVariant variant = KernelSelector.Current;
        var parallel = new ForwardOptions { MaxThreads = _options.MaxThreads }.Parallelism;
        for (int first = 0; first < headRows.Count; first += slice)
        {
            int n = Math.Min(slice, headRows.Count - first);
            for (int i = 0; i < n; i++)
            {
                HeadRow h = headRows[first + i];
                r.HiddenState(_finalLayer, h.Sequence, h.Position).CopyTo(normed.AsSpan(i * d, d));
            }
            Kernels.Kernels.Gemm(normed, n, d, weights.Head, logits, v, accumulate: false, variant, parallel);

            // Next-word rows become distributions in place; candidate rows give log p(token) = x_t − max − ln Σ exp(x − max).
            var mainRows = new List<int>();
            for (int i = 0; i < n; i++)
            {
                HeadRow h = headRows[first + i];
                Span<float> x = logits.AsSpan(i * v, v);
                if (h.Candidate < 0)
                {
                    Kernels.Kernels.SoftmaxInPlace(x);
                    NextWordFeatures(x, values[h.Row], ids[h.Row]);
                    mainRows.Add(i);
                }
                else
                {
                    float max = TensorPrimitives.Max(x);
                    float target = x[h.Token];
                    TensorPrimitives.Subtract(x, max, x);
                    TensorPrimitives.Exp(x, x);
                    float logProbability = target - max - MathF.Log(TensorPrimitives.Sum(x));
                    Candidate c = _candidates[h.Candidate];
                    values[h.Row][c.Output]![c.Column] += logProbability;
                }
            }

            if (cmeanOutput >= 0 && mainRows.Count > 0)
            {
                // Distributions of this slice laid end to end (they already are when every row is a next-word row).
                float[] p = mainRows.Count == n ? logits : Gather(logits, mainRows, v);
                Kernels.Kernels.ConditionalMean(p, mainRows.Count, weights.Head, cmeanOut, variant, parallel);
                for (int m = 0; m < mainRows.Count; m++)
                {
                    cmeanOut.AsSpan(m * d, d).CopyTo(values[headRows[first + mainRows[m]].Row][cmeanOutput]);
                }
            }
        }
    }

    private void NextWordFeatures(ReadOnlySpan<float> p, float[]?[] values, int[]?[] ids)
    {
        for (int o = 0; o < Outputs.Count; o++)
        {
            FeatureOutput output = Outputs[o];
            switch (output.Request)
            {
                case NextWordFeature:
                    p.CopyTo(values[o]);
                    break;
                case TopTokensFeature t when output.Element == FeatureElement.TokenId:
                    TopTokens(p, t.Count, ids[o]!, values[o + 1]!);
                    break;
                case WordListFeature when output.Name == "words.first":
                {
                    float[] dst = values[o]!;
                    for (int w = 0; w < dst.Length; w++)
                    {
                        dst[w] = p[_firstTokens![w]];
                    }
                    break;
                }
                default:
                    break;
            }
        }
    }

    /// <summary>The k largest probabilities, descending; equal probabilities by ascending id.</summary>
    private static void TopTokens(ReadOnlySpan<float> p, int k, int[] ids, float[] probabilities)
    {
        // A min-heap of the best k so far, whose root is the weakest: lower probability, or higher id at a tie.
        var heap = new PriorityQueue<int, (float P, int Id)>(k, WeakestFirst.Instance);
        for (int id = 0; id < p.Length; id++)
        {
            if (heap.Count < k)
            {
                heap.Enqueue(id, (p[id], id));
            }
            else
            {
                heap.TryPeek(out _, out (float P, int Id) weakest);
                if (p[id] > weakest.P)
                {
                    heap.DequeueEnqueue(id, (p[id], id));
                }
            }
        }
        for (int i = k - 1; i >= 0; i--)
        {
            heap.TryDequeue(out int id, out (float P, int Id) key);
            ids[i] = id;
            probabilities[i] = key.P;
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

    private PreparedRow Prepare(string text)
    {
        int[] textIds = _model.Tokenizer.Encode(text);
        int truncated = Math.Max(0, textIds.Length - TextTokenLimit);
        if (truncated > 0)
        {
            textIds = _options.Truncation == TextTruncation.KeepHead ? textIds[..TextTokenLimit] : textIds[truncated..];
        }

        var tokens = new List<int>(_promptTokens + textIds.Length);
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

    private int[][] EncodeAll(IReadOnlyList<string> items, string what)
    {
        if (items.Count == 0)
        {
            throw new ArgumentException($"the {what} list is empty", nameof(items));
        }
        var result = new int[items.Count][];
        for (int i = 0; i < items.Count; i++)
        {
            string item = items[i] ?? throw new ArgumentException($"{what} {i + 1} is null", nameof(items));
            result[i] = _model.Tokenizer.Encode(_options.LeadingSpace ? " " + item : item);
            if (result[i].Length == 0)
            {
                throw new ArgumentException($"{what} {i + 1} (\"{item}\") has no tokens", nameof(items));
            }
        }
        return result;
    }

    private void AddCandidates(int[][] ids, int output)
    {
        for (int i = 0; i < ids.Length; i++)
        {
            _candidates.Add(new Candidate(ids[i], output, i));
        }
    }

    private int IndexOf<T>() where T : FeatureRequest
    {
        for (int o = 0; o < Outputs.Count; o++)
        {
            if (Outputs[o].Request is T)
            {
                return o;
            }
        }
        return -1;
    }

    private readonly record struct PreparedRow(int[] Tokens, int Truncated, int MarkPosition);

    private readonly record struct Job(int Row, int Candidate, int Length);

    private readonly record struct HeadRow(int Sequence, int Position, int Row, int Candidate, int Token);

    private sealed record Candidate(int[] Ids, int Output, int Column);

    private sealed class WeakestFirst : IComparer<(float P, int Id)>
    {
        public static readonly WeakestFirst Instance = new();

        public int Compare((float P, int Id) a, (float P, int Id) b) =>
            a.P != b.P ? a.P.CompareTo(b.P) : b.Id.CompareTo(a.Id);
    }
}

/// <summary>Counts rows and tokens across the groups of one extraction and reports them.</summary>
internal sealed class ProgressTracker(IProgress<ExtractionProgress>? progress)
{
    private readonly Stopwatch _clock = Stopwatch.StartNew();
    private long _rows, _tokens;

    public long Rows => _rows;

    public long Tokens => _tokens;

    public void Add(int rows, int tokens)
    {
        _rows += rows;
        _tokens += tokens;
        progress?.Report(new ExtractionProgress(_rows, _tokens, _clock.Elapsed));
    }
}
