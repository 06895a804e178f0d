using Assay.Features;
using Assay.Model;
using Assay.Tests.Support;
using Assay.Weights;

namespace Assay.Tests.Features;

/// <summary>One opened model shared by several threads at once gives every thread the features one thread gets.</summary>
public sealed class ConcurrencyTests
{
    [Theory]
    [InlineData(WeightPrecision.Binary32)]
    [InlineData(WeightPrecision.Integer8)]
    public void One_model_used_from_eight_threads_at_once_gives_the_single_thread_features(WeightPrecision precision)
    {
        LanguageModel model = LanguageModel.Open(Checkpoints.Folder(FeatureExtractorTests.Spec), precision);
        FeatureRequest[] features =
        [
            new HiddenStateFeature(1), new HiddenStateFeature(-1, HiddenPooling.Mean), new NextWordFeature(),
            new TopTokensFeature(3), new ConditionalMeanFeature(), new CompletionFeature(["a tool", "x"]),
        ];
        // Different token budgets per thread: batches differ, features must not.
        FeatureExtractor Extractor(int budget) => new(model, new ExtractionOptions
        {
            Prompt = PromptTemplate.Parse("{text} It is a kind of"),
            Features = features,
            TokenBudget = budget,
        });
        string[] texts = [.. Enumerable.Range(0, 40).Select(i => FeatureExtractorTests.Texts[i % FeatureExtractorTests.Texts.Length] + " " + i)];
        FeatureRow[] alone = [.. Extractor(4096).Extract(texts)];

        var results = new FeatureRow[8][];
        using var start = new Barrier(8);
        Thread[] threads = [.. Enumerable.Range(0, 8).Select(t => new Thread(() =>
        {
            start.SignalAndWait();
            results[t] = [.. Extractor(30 + (t * 97)).Extract(texts)];
        }))];
        foreach (Thread t in threads)
        {
            t.Start();
        }
        foreach (Thread t in threads)
        {
            t.Join();
        }

        IReadOnlyList<FeatureOutput> outputs = Extractor(4096).Outputs;
        for (int t = 0; t < results.Length; t++)
        {
            Assert.Equal(alone.Length, results[t].Length);
            for (int r = 0; r < alone.Length; r++)
            {
                for (int o = 0; o < outputs.Count; o++)
                {
                    if (outputs[o].Element == FeatureElement.TokenId)
                    {
                        Assert.Equal(alone[r].TokenIds(o).ToArray(), results[t][r].TokenIds(o).ToArray());
                    }
                    else
                    {
                        Assert.Equal(alone[r].Values(o).ToArray(), results[t][r].Values(o).ToArray());
                    }
                }
            }
        }
    }
}
