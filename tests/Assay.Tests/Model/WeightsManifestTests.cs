using System.Text.Json;
using Assay.Config;
using Assay.Model;

namespace Assay.Tests.Model;

/// <summary>Each weights-manifest entry's inventory is what its architecture implies.</summary>
public sealed class WeightsManifestTests
{
    [Fact]
    public void Gpt2_124m_entry_matches_its_architecture_and_the_published_count()
    {
        string path = Path.Combine(WeightsManifestPinTests.RepositoryManifest(), "gpt2-124m.json");
        using JsonDocument doc = JsonDocument.Parse(File.ReadAllText(path));
        JsonElement root = doc.RootElement;
        string config = Path.Combine(Path.GetTempPath(), "assay-manifest-config-" + Guid.NewGuid().ToString("N") + ".json");
        File.WriteAllText(config, root.GetProperty("architecture").GetRawText());
        try
        {
            ModelConfig c = ModelConfig.Load(config);
            // 124,439,808: the published GPT-2 small parameter count.
            Assert.Equal(124_439_808L, root.GetProperty("parameter_count").GetInt64());
            Assert.Equal(124_439_808L, c.ParameterCount);
            var listed = root.GetProperty("tensors").EnumerateArray()
                .Select(t => (t.GetProperty("name").GetString()!, t.GetProperty("shape").EnumerateArray().Select(x => x.GetInt64()).ToArray()))
                .ToList();
            var implied = Assay.Model.CheckpointLayout.For(c).ExpectedParameters(c).ToList();
            Assert.Equal(implied.Select(p => p.Name), listed.Select(p => p.Item1));
            Assert.Equal(implied.Select(p => string.Join(",", p.Shape)), listed.Select(p => string.Join(",", p.Item2)));
        }
        finally
        {
            File.Delete(config);
        }
    }
}
