using Assay.Features;
using Assay.Fixtures;
using Assay.Model;
using Assay.Tests.Support;

namespace Assay.Tests.Features;

public sealed class FeatureExtractorTests
{
    internal static readonly CheckpointSpec Spec = new() { Width = 48, Layers = 2, Heads = 3, Context = 40, Vocabulary = 300 };

    internal static readonly string[] Texts =
    [
        "a lamp that guides ships", "salt", "the miller grinds the grain into flour every morning",
        "a bell in the tower", "ropes and nets", "x", "a long text about the harbour, the boats and the tides of the bay",
        "an oar",
    ];

    private const string Template = "Q: {text}{mark} A: it is";

    private static LanguageModel Model() => LanguageModel.Open(Checkpoints.Folder(Spec));

    /// <summary>The filled template as the extractor documents it: each piece tokenized alone, laid end to end.</summary>
    private static (int[] Tokens, int Mark) Fill(LanguageModel m, string text, int textTokenLimit)
    {
        int[] before = m.Tokenizer.Encode("Q: "), body = m.Tokenizer.Encode(text), after = m.Tokenizer.Encode(" A: it is");
        body = body.Length > textTokenLimit ? body[..textTokenLimit] : body;
        return ([.. before, .. body, .. after], before.Length + body.Length - 1);
    }

    [Fact]
    public void Every_feature_equals_the_forward_pass_own_values()
    {
        LanguageModel m = Model();
        string[] words = ["boat", "bell"];
        string[] completions = ["a tool", "x"];
        var extractor = new FeatureExtractor(m, new ExtractionOptions
        {
            Prompt = PromptTemplate.Parse(Template),
            Features =
            [
                new HiddenStateFeature(1), new HiddenStateFeature(-1, HiddenPooling.Mean), new HiddenStateFeature(0, HiddenPooling.Marked),
                new NextWordFeature(), new TopTokensFeature(4), new WordListFeature(words, FullLogLikelihood: true),
                new ConditionalMeanFeature(), new CompletionFeature(completions),
            ],
            TokenBudget = 50,
        });
        Assert.Equal(
            ["hidden.layer1.last", "hidden.layer2.mean", "hidden.layer0.mark", "nextword", "topk4.ids", "topk4.probs",
             "words.first", "words.loglik", "cmean", "completions.loglik"],
            extractor.Outputs.Select(o => o.Name));
        FeatureRow[] rows = extractor.Extract(Texts).ToArray();
        Assert.Equal(Texts.Length, rows.Length);
        Assert.Contains(rows, r => r.TruncatedTokens > 0);

        int v = m.Config.VocabularySize;
        for (int i = 0; i < Texts.Length; i++)
        {
            FeatureRow row = rows[i];
            Assert.Equal(i, row.Index);
            (int[] tokens, int mark) = Fill(m, Texts[i], extractor.TextTokenLimit);
            Assert.Equal(tokens.Length, row.TokenCount);
            ForwardResult r = m.Forward([tokens], new ForwardOptions { HiddenLayers = [0, 1, 2], Logits = LogitPositions.All });
            int last = tokens.Length - 1;

            // Hidden states: bit-identical to the single-sequence pass (each row is computed alone, in a fixed order).
            Assert.Equal(r.HiddenState(1, 0, last).ToArray(), row.Values(0).ToArray());
            Assert.Equal(r.HiddenState(0, 0, mark).ToArray(), row.Values(2).ToArray());
            double[] mean = new double[m.Config.Width];
            for (int t = 0; t <= last; t++)
            {
                ReadOnlySpan<float> h = r.HiddenState(2, 0, t);
                for (int j = 0; j < mean.Length; j++)
                {
                    mean[j] += h[j] / (double)tokens.Length;
                }
            }
            Tolerance.AssertClose(row.Values(1), mean, 1e-6, 1e-6, "mean pooling");

            float[] p = new float[v];
            r.NextTokenProbabilities(0, p);
            Assert.Equal(p, row.Values(3).ToArray());
            int[] order = Enumerable.Range(0, v).OrderByDescending(id => p[id]).ThenBy(id => id).Take(4).ToArray();
            Assert.Equal(order, row.TokenIds(4).ToArray());
            Assert.Equal(order.Select(id => p[id]), row.Values(5).ToArray());

            for (int w = 0; w < words.Length; w++)
            {
                int[] ids = m.Tokenizer.Encode(" " + words[w]);
                Assert.Equal(p[ids[0]], row.Values(6)[w]);
                Tolerance.AssertClose(row.Values(7).Slice(w, 1), [LogLikelihood(m, tokens, ids)], 1e-5, 1e-6, "word log-likelihood");
            }
            for (int c = 0; c < completions.Length; c++)
            {
                Tolerance.AssertClose(row.Values(9).Slice(c, 1), [LogLikelihood(m, tokens, m.Tokenizer.Encode(" " + completions[c]))], 1e-5, 1e-6, "completion log-likelihood");
            }
        }
    }

    /// <summary>
    /// Σ_t log softmax(logits)[next token] over the continuation, in float64 from the forward pass's logits; the
    /// extractor sums float32 terms, so the stated tolerance is 1e-5 + 1e-6·|x| nats.
    /// </summary>
    private static double LogLikelihood(LanguageModel m, int[] prefix, int[] continuation)
    {
        int[] all = [.. prefix, .. continuation];
        ForwardResult r = m.Forward([all], new ForwardOptions { Logits = LogitPositions.All });
        double sum = 0;
        for (int t = 0; t < continuation.Length; t++)
        {
            ReadOnlySpan<float> x = r.Logits(0, prefix.Length - 1 + t);
            double max = double.NegativeInfinity;
            foreach (float f in x)
            {
                max = Math.Max(max, f);
            }
            double z = 0;
            foreach (float f in x)
            {
                z += Math.Exp(f - max);
            }
            sum += x[continuation[t]] - max - Math.Log(z);
        }
        return sum;
    }

    [Fact]
    public void Batching_and_thread_count_change_no_bit()
    {
        LanguageModel m = Model();
        IReadOnlyList<FeatureRequest> features = [new HiddenStateFeature(-1), new HiddenStateFeature(1, HiddenPooling.Mean), new ConditionalMeanFeature(), new TopTokensFeature(3)];
        float[][] Run(int budget, int threads) => new FeatureExtractor(m, new ExtractionOptions { Features = features, TokenBudget = budget, MaxThreads = threads })
            .Extract(Texts).SelectMany(r => new[] { r.Values(0).ToArray(), r.Values(1).ToArray(), r.Values(2).ToArray(), r.Values(4).ToArray() }).ToArray();

        float[][] reference = Run(4096, 0);
        // Tolerance stated: zero. Every output element is one fixed-order sum computed by one thread.
        Assert.Equal(reference, Run(1, 0));
        Assert.Equal(reference, Run(4096, 1));
        Assert.Equal(reference, Run(17, 2));
    }

    [Fact]
    public async Task One_model_serves_several_threads_at_once()
    {
        LanguageModel m = Model();
        var extractor = new FeatureExtractor(m, new ExtractionOptions());
        float[] Flatten() => extractor.Extract(Texts).SelectMany(r => r.Values(0).ToArray().Concat(r.Values(1).ToArray())).ToArray();
        float[] expected = Flatten();
        float[][] parallel = await Task.WhenAll(Enumerable.Range(0, 4).Select(_ => Task.Run(Flatten)));
        Assert.All(parallel, p => Assert.Equal(expected, p));
    }

    [Fact]
    public async Task Async_stream_gives_the_same_rows_and_honours_cancellation()
    {
        LanguageModel m = Model();
        var extractor = new FeatureExtractor(m, new ExtractionOptions());
        string[] many = Enumerable.Range(0, 600).Select(i => Texts[i % Texts.Length]).ToArray();
        float[] expected = extractor.Extract(many).SelectMany(r => r.Values(1).ToArray()).ToArray();

        var seen = new List<float>();
        await foreach (FeatureRow row in extractor.ExtractAsync(Source(many)))
        {
            seen.AddRange(row.Values(1).ToArray());
        }
        Assert.Equal(expected, seen);

        using var cancel = new CancellationTokenSource();
        var reports = new List<ExtractionProgress>();
        var progress = new SyncProgress(p =>
        {
            reports.Add(p);
            cancel.Cancel();
        });
        await Assert.ThrowsAnyAsync<OperationCanceledException>(async () =>
        {
            await foreach (FeatureRow _ in extractor.ExtractAsync(Source(many), progress, cancel.Token))
            {
            }
        });
        Assert.Single(reports);
        Assert.True(reports[0].Rows is > 0 and < 600);
    }

    private static async IAsyncEnumerable<string> Source(IEnumerable<string> texts)
    {
        foreach (string t in texts)
        {
            await Task.Yield();
            yield return t;
        }
    }

    [Fact]
    public void Over_long_text_loses_its_tail_or_head_never_the_prompt()
    {
        LanguageModel m = Model();
        string longText = string.Concat(Enumerable.Repeat("abcdefgh ", 20));
        int[] body = m.Tokenizer.Encode(longText);
        foreach (TextTruncation keep in new[] { TextTruncation.KeepHead, TextTruncation.KeepTail })
        {
            var extractor = new FeatureExtractor(m, new ExtractionOptions
            {
                Prompt = PromptTemplate.Parse(Template),
                Features = [new HiddenStateFeature(0, HiddenPooling.Marked), new HiddenStateFeature(0)],
                Truncation = keep,
            });
            int limit = extractor.TextTokenLimit;
            Assert.Equal(Spec.Context - extractor.PromptTokens, limit);
            FeatureRow row = extractor.Extract([longText]).Single();
            Assert.Equal(body.Length - limit, row.TruncatedTokens);
            Assert.Equal(Spec.Context, row.TokenCount);

            int[] kept = keep == TextTruncation.KeepHead ? body[..limit] : body[^limit..];
            int[] before = m.Tokenizer.Encode("Q: "), after = m.Tokenizer.Encode(" A: it is");
            int[] tokens = [.. before, .. kept, .. after];
            ForwardResult r = m.Forward([tokens], new ForwardOptions { HiddenLayers = [0] });
            Assert.Equal(r.HiddenState(0, 0, before.Length + limit - 1).ToArray(), row.Values(0).ToArray());
            Assert.Equal(r.HiddenState(0, 0, tokens.Length - 1).ToArray(), row.Values(1).ToArray());
        }
    }

    [Fact]
    public void Candidates_reserve_room_in_the_context()
    {
        LanguageModel m = Model();
        var extractor = new FeatureExtractor(m, new ExtractionOptions { Features = [new CompletionFeature(["abcdef"])], LeadingSpace = false });
        Assert.Equal(Spec.Context - m.Tokenizer.Encode("abcdef").Length, extractor.TextTokenLimit);
    }

    [Theory]
    [InlineData(5, "layers 0 … 2")]
    [InlineData(-4, "layers 0 … 2")]
    public void Bad_layers_are_refused(int layer, string message)
    {
        ArgumentException e = Assert.Throws<ArgumentException>(() =>
            new FeatureExtractor(Model(), new ExtractionOptions { Features = [new HiddenStateFeature(layer)] }));
        Assert.Contains(message, e.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void Bad_requests_are_refused_with_the_reason()
    {
        LanguageModel m = Model();
        Assert.Contains("has no {mark}", Assert.Throws<ArgumentException>(() => new FeatureExtractor(m,
            new ExtractionOptions { Features = [new HiddenStateFeature(1, HiddenPooling.Marked)] })).Message, StringComparison.Ordinal);
        Assert.Contains("the word list is empty", Assert.Throws<ArgumentException>(() => new FeatureExtractor(m,
            new ExtractionOptions { Features = [new WordListFeature([])] })).Message, StringComparison.Ordinal);
        Assert.Contains("no token is left for the text", Assert.Throws<ArgumentException>(() => new FeatureExtractor(m,
            new ExtractionOptions { Prompt = PromptTemplate.Parse("{text}" + new string('z', 60)) })).Message, StringComparison.Ordinal);
        Assert.Contains("write the output cmean", Assert.Throws<ArgumentException>(() => new FeatureExtractor(m,
            new ExtractionOptions { Features = [new ConditionalMeanFeature(), new ConditionalMeanFeature()] })).Message, StringComparison.Ordinal);
        Assert.Contains("text 1 is empty", Assert.Throws<ArgumentException>(() =>
            new FeatureExtractor(m, new ExtractionOptions()).Extract(["ok", ""]).ToArray()).Message, StringComparison.Ordinal);
    }

    private sealed class SyncProgress(Action<ExtractionProgress> report) : IProgress<ExtractionProgress>
    {
        public void Report(ExtractionProgress value) => report(value);
    }
}
