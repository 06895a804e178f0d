using System.Text.Json;
using Assay.Features;
using Assay.Fixtures;
using Assay.Model;
using Assay.Tests.Model;
using Assay.Tests.Support;
using Xunit.Abstractions;

namespace Assay.Tests.Features;

/// <summary>
/// Every feature kind on the rotary families against the float64 numpy reference (Debian python3-numpy, run live:
/// Reference/decoder_numpy.py, written from the published architecture descriptions): hidden states of every layer
/// (layer 0 the token embeddings, no position vector), the next-word distribution p, Φp = p·E with the family's head,
/// and completion log-likelihoods, each through the extractor with a prompt template, within atol 1e-4 + rtol 1e-4.
/// </summary>
public sealed class FamilyFeatureTests(ITestOutputHelper output)
{
    // Short enough that no text is cut at the smallest context (18) with the prompt and the longest completion.
    private static readonly string[] Texts = ["a lamp", "salt", "the mill", "an oar"];

    private static readonly string[] Completions = ["ab", "x"];

    [Theory]
    [InlineData("llama-gqa-width60")]
    [InlineData("llama3-scaled-bf16")]
    [InlineData("mistral-window5")]
    [InlineData("qwen2-bias-window")]
    [InlineData("neox-parallel-pct06")]
    public void Every_feature_kind_matches_numpy(string name)
    {
        CheckpointSpec spec = ForwardParityTests.Families[name];
        string folder = Checkpoints.Folder(spec);
        LanguageModel m = LanguageModel.Open(folder);
        var extractor = new FeatureExtractor(m, new ExtractionOptions
        {
            Prompt = PromptTemplate.Parse("Q: {text} A:"),
            Features =
            [
                .. Enumerable.Range(0, spec.Layers + 1).Select(l => (FeatureRequest)new HiddenStateFeature(l)),
                new NextWordFeature(), new ConditionalMeanFeature(), new CompletionFeature(Completions),
            ],
        });
        FeatureRow[] rows = extractor.Extract(Texts).ToArray();

        // The filled template as the extractor documents it (pieces tokenized alone, end to end), then each
        // completion after it: one reference pass over all of them.
        int[] before = m.Tokenizer.Encode("Q: "), after = m.Tokenizer.Encode(" A:");
        int[][] filled = [.. Texts.Select(t => (int[])[.. before, .. m.Tokenizer.Encode(t), .. after])];
        int[][] continuations = [.. Completions.Select(c => m.Tokenizer.Encode(" " + c))];
        int[][] withCompletions = [.. filled.SelectMany(f => continuations.Select(c => (int[])[.. f, .. c]))];
        using var temp = new TempFolder();
        string seqPath = temp.File("sequences.json");
        File.WriteAllText(seqPath, JsonSerializer.Serialize((int[][])[.. filled, .. withCompletions]));
        string outDir = temp.File("out");
        PythonReference.Run("decoder_numpy.py", folder, seqPath, outDir, "--all-logits");

        int d = spec.Width, v = spec.Vocabulary, n = Texts.Length;
        int[] offsets = new int[filled.Length + withCompletions.Length + 1];
        int[][] all = [.. filled, .. withCompletions];
        for (int s = 0; s < all.Length; s++)
        {
            offsets[s + 1] = offsets[s] + all[s].Length;
        }
        for (int l = 0; l <= spec.Layers; l++)
        {
            (double[] hidden, _) = Npy.Read(Path.Combine(outDir, $"hidden_{l}.npy"));
            for (int i = 0; i < n; i++)
            {
                Assert.Equal(filled[i].Length, rows[i].TokenCount);
                double[] expected = hidden.AsSpan((offsets[i + 1] - 1) * d, d).ToArray();
                Tolerance.AssertClose(rows[i].Values(l), expected, 1e-4, 1e-4, $"{name}: hidden layer {l}, text {i}");
            }
        }
        (double[] p, _) = Npy.Read(Path.Combine(outDir, "p_last.npy"));
        (double[] cmean, _) = Npy.Read(Path.Combine(outDir, "cmean_last.npy"));
        (double[] logits, _) = Npy.Read(Path.Combine(outDir, "logits_all.npy"));
        int next = spec.Layers + 1;
        double worst = 0;
        for (int i = 0; i < n; i++)
        {
            Tolerance.AssertClose(rows[i].Values(next), p.AsSpan(i * v, v).ToArray(), 1e-4, 1e-4, $"{name}: p, text {i}");
            Tolerance.AssertClose(rows[i].Values(next + 1), cmean.AsSpan(i * d, d).ToArray(), 1e-4, 1e-4, $"{name}: Φp, text {i}");
            for (int c = 0; c < Completions.Length; c++)
            {
                int s = n + (i * Completions.Length) + c;
                double expected = 0;
                for (int t = 0; t < continuations[c].Length; t++)
                {
                    // The logits at the position before each completion token, from the reference's pass over text + completion.
                    int row = offsets[s] + filled[i].Length - 1 + t;
                    expected += LogSoftmax(logits.AsSpan(row * v, v), continuations[c][t]);
                }
                Tolerance.AssertClose(rows[i].Values(next + 2).Slice(c, 1), [expected], 1e-4, 1e-4, $"{name}: completion {c}, text {i}");
                worst = Math.Max(worst, Math.Abs(rows[i].Values(next + 2)[c] - expected));
            }
        }
        output.WriteLine($"{name}: completion log-likelihood max |diff| {worst:E2}");
    }

    /// <summary>Cross-entropy (each short text after the end-of-text token) against a float64 log-softmax of the numpy reference's logits.</summary>
    [Theory]
    [InlineData("llama-gqa-width60")]
    [InlineData("neox-sequential-bf16")]
    public void Cross_entropy_matches_numpy(string name)
    {
        CheckpointSpec spec = ForwardParityTests.Families[name];
        string folder = Checkpoints.Folder(spec);
        LanguageModel m = LanguageModel.Open(folder);
        Assay.Evaluation.CrossEntropyResult r = Assay.Evaluation.CrossEntropy.Score(m, Texts);
        int[][] windows = [.. Texts.Select(t => (int[])[m.Tokenizer.EndOfTextId, .. m.Tokenizer.Encode(t)])];
        using var temp = new TempFolder();
        File.WriteAllText(temp.File("sequences.json"), JsonSerializer.Serialize(windows));
        PythonReference.Run("decoder_numpy.py", folder, temp.File("sequences.json"), temp.File("out"), "--all-logits");
        (double[] logits, _) = Npy.Read(Path.Combine(temp.File("out"), "logits_all.npy"));
        int v = spec.Vocabulary, row = 0;
        double nats = 0;
        foreach (int[] w in windows)
        {
            for (int t = 0; t + 1 < w.Length; t++)
            {
                nats -= LogSoftmax(logits.AsSpan((row + t) * v, v), w[t + 1]);
            }
            row += w.Length;
        }
        Assert.Equal(windows.Sum(w => w.Length - 1), r.Tokens);
        Assert.True(Math.Abs(r.Nats - nats) < 1e-4 * Math.Max(1, nats), $"{name}: {r.Nats} nats, numpy {nats}");
    }

    private static double LogSoftmax(ReadOnlySpan<double> x, int index)
    {
        double max = double.NegativeInfinity;
        foreach (double a in x)
        {
            max = Math.Max(max, a);
        }
        double sum = 0;
        foreach (double a in x)
        {
            sum += Math.Exp(a - max);
        }
        return x[index] - max - Math.Log(sum);
    }
}
