using System.Text.Json;
using Assay.Cli.Commands;
using Assay.Model;
using Assay.Tests.Support;

namespace Assay.Tests.Model;

/// <summary>The trained demo model shipped in src/Assay.Cli/models: intact, and better than chance at English.</summary>
public sealed class BundledModelTests
{
    private static string Repository => Path.GetDirectoryName(WeightsManifestPinTests.RepositoryManifest())!;

    private static string ModelFolder(string name) => Path.Combine(Repository, "src", "Assay.Cli", "models", name);

    [Theory]
    [InlineData("assay-demo")]
    [InlineData("assay-demo-25pct")]
    [InlineData("assay-demo-5pct")]
    [InlineData("assay-demo-init")]
    public void Each_bundled_checkpoint_matches_its_pinned_manifest_entry(string name) =>
        Assert.Empty(WeightsManifest.Verify(ModelFolder(name), Path.Combine(WeightsManifestPinTests.RepositoryManifest(), name + ".json")));

    [Fact]
    public void The_command_default_is_the_bundled_model()
    {
        Assert.True(File.Exists(Path.Combine(ModelOption.DefaultFolder, "model.safetensors")), ModelOption.DefaultFolder);
        Assert.Empty(WeightsManifest.Verify(ModelOption.DefaultFolder, Path.Combine(WeightsManifestPinTests.RepositoryManifest(), "assay-demo.json")));
    }

    [Fact]
    public void Training_made_a_verse_of_its_training_text_likelier()
    {
        // KJV Genesis 1:1 "In the beginning God created the heaven" (WEB: "heavens"): both are in the training text.
        double Probability(string name)
        {
            LanguageModel m = LanguageModel.Open(ModelFolder(name));
            ForwardResult r = m.Forward([m.Tokenizer.Encode("In the beginning God created the")]);
            float[] p = new float[r.VocabularySize];
            r.NextTokenProbabilities(0, p);
            return p[m.Tokenizer.Encode(" heaven")[0]] + p[m.Tokenizer.Encode(" heavens")[0]];
        }
        double early = Probability("assay-demo-5pct"), final = Probability("assay-demo");
        Assert.True(final > 2 * early, $"p(heaven|s) after 5 %: {early:E3}, final: {final:E3}");
    }

    /// <summary>
    /// Next-token cross-entropy on held-out text (WordNet test definitions, never trained on, each after
    /// &lt;|endoftext|&gt; as documents were in training), per checkpoint: it must fall as training goes on. Short
    /// definitions are harder than the trainer's 128-token validation windows (4.27 nats/token there at the end).
    /// </summary>
    [Fact]
    public void Held_out_cross_entropy_falls_over_training()
    {
        string[] texts = [.. File.ReadLines(Path.Combine(Repository, "src", "Assay.Cli", "tasks", "wordnet-supersense", "test.jsonl"))
            .Take(400).Select(l => JsonDocument.Parse(l).RootElement.GetProperty("text").GetString()!)];
        double[] ce = [.. new[] { "assay-demo-5pct", "assay-demo-25pct", "assay-demo" }.Select(n => CrossEntropy(LanguageModel.Open(ModelFolder(n)), texts))];
        Assert.True(ce[0] > ce[1] && ce[1] > ce[2], $"cross-entropy by checkpoint: {string.Join(", ", ce)}");
        Assert.True(ce[2] < FinalBound, $"final model: {ce[2]:F3} nats/token ({string.Join(", ", ce)})");
    }

    /// <summary>Measured (first 400 lines of the shuffled test file, as `assay cross-entropy`): 8.11, 6.92 and 6.38 nats/token after 5 %, 25 % and 100 % of training; the bound leaves a margin.</summary>
    private const double FinalBound = 6.8;

    private static double CrossEntropy(LanguageModel m, string[] texts)
    {
        double sum = 0;
        long count = 0;
        foreach (string text in texts)
        {
            int[] ids = [m.Tokenizer.EndOfTextId, .. m.Tokenizer.Encode(text)];
            ids = ids.Length > m.Config.ContextLength ? ids[..m.Config.ContextLength] : ids;
            ForwardResult r = m.Forward([ids], new ForwardOptions { Logits = LogitPositions.All });
            for (int t = 0; t + 1 < ids.Length; t++)
            {
                ReadOnlySpan<float> x = r.Logits(0, t);
                double max = double.NegativeInfinity, z = 0;
                foreach (float f in x)
                {
                    max = Math.Max(max, f);
                }
                foreach (float f in x)
                {
                    z += Math.Exp(f - max);
                }
                sum += max + Math.Log(z) - x[ids[t + 1]];
                count++;
            }
        }
        return sum / count;
    }
}
