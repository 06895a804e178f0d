using System.Text.Json;
using Assay.Config;
using Assay.Model;

namespace Assay.Tests.Model;

/// <summary>Each weights-manifest entry's inventory is what its architecture implies.</summary>
public sealed class WeightsManifestTests
{
    public static TheoryData<string, long> Entries()
    {
        // 124,439,808: the published GPT-2 small parameter count; the others as quoted for their checkpoints (from memory).
        var data = new TheoryData<string, long> { { "gpt2-124m.json", 124_439_808L } };
        foreach ((string entry, _, long parameters) in Assay.Tests.Config.PublishedConfigs.All)
        {
            data.Add(entry, parameters);
        }
        return data;
    }

    [Theory]
    [MemberData(nameof(Entries))]
    public void Published_entries_match_their_architecture_and_the_published_count(string entry, long parameters)
    {
        string path = Path.Combine(WeightsManifestPinTests.RepositoryManifest(), entry);
        using JsonDocument doc = JsonDocument.Parse(File.ReadAllText(path));
        JsonElement root = doc.RootElement;
        string config = Path.Combine(Path.GetTempPath(), "assay-manifest-config-" + Guid.NewGuid().ToString("N") + ".json");
        File.WriteAllText(config, root.GetProperty("architecture").GetRawText());
        try
        {
            ModelConfig c = ModelConfig.Load(config);
            Assert.Equal(parameters, root.GetProperty("parameter_count").GetInt64());
            Assert.Equal(parameters, c.ParameterCount);
            Assert.Equal(c.FamilyName, root.GetProperty("family").GetString());
            var listed = root.GetProperty("tensors").EnumerateArray()
                .Select(t => (t.GetProperty("name").GetString()!, t.GetProperty("shape").EnumerateArray().Select(x => x.GetInt64()).ToArray()))
                .ToList();
            var implied = CheckpointLayout.For(c).ExpectedParameters(c).ToList();
            Assert.Equal(implied.Select(p => p.Name), listed.Select(p => p.Item1));
            Assert.Equal(implied.Select(p => string.Join(",", p.Shape)), listed.Select(p => string.Join(",", p.Item2)));
            // The listed shapes hold exactly the parameters counted (a tied head listed once).
            Assert.Equal(parameters, listed.Sum(p => p.Item2.Aggregate(1L, (a, b) => a * b)));
        }
        finally
        {
            File.Delete(config);
        }
    }
}
