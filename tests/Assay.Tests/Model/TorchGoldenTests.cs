using System.Text.Json;
using Assay.Fixtures;
using Assay.Model;
using Assay.Tests.Support;
using Xunit.Abstractions;

namespace Assay.Tests.Model;

/// <summary>
/// The forward pass against golden outputs computed with libtorch ops (layer_norm, tanh GELU, causal
/// scaled_dot_product_attention) by tools/Assay.TorchReference; see Golden/README.md for the command that made them.
/// Tolerance: atol 1e-4 + rtol 1e-4, as for the numpy reference.
/// </summary>
public sealed class TorchGoldenTests(ITestOutputHelper output)
{
    private static readonly string Root = Path.Combine(AppContext.BaseDirectory, "Golden");

    public static TheoryData<string> CaseNames =>
        [.. ReadManifest().Select(c => c.Name)];

    [Theory]
    [MemberData(nameof(CaseNames))]
    public void Matches_libtorch_golden_outputs(string name)
    {
        GoldenCase c = ReadManifest().Single(x => x.Name == name);
        LanguageModel model = LanguageModel.Open(Checkpoints.Folder(c.Spec));
        ForwardResult r = model.Forward(c.Sequences, new ForwardOptions { HiddenLayers = [.. Enumerable.Range(0, c.Spec.Layers + 1)] });
        for (int k = 0; k <= c.Spec.Layers; k++)
        {
            (double[] expected, int[] shape) = Npy.Read(Path.Combine(Root, name, $"hidden_{k}.npy"));
            Assert.Equal([c.Sequences.Sum(s => s.Length), c.Spec.Width], shape);
            var actual = new List<float>();
            for (int s = 0; s < c.Sequences.Length; s++)
            {
                for (int t = 0; t < c.Sequences[s].Length; t++)
                {
                    actual.AddRange(r.HiddenState(k, s, t).ToArray());
                }
            }
            Tolerance.AssertClose(actual.ToArray(), expected, 1e-4, 1e-4, $"{name} layer {k}");
            output.WriteLine($"layer {k}: max |diff| {Tolerance.MaxAbsDifference(actual.ToArray(), expected):E2}");
        }
        (double[] logits, _) = Npy.Read(Path.Combine(Root, name, "logits_last.npy"));
        float[] last = [.. Enumerable.Range(0, c.Sequences.Length).SelectMany(s => r.LastLogits(s).ToArray())];
        Tolerance.AssertClose(last, logits, 1e-4, 1e-4, $"{name} logits");
        output.WriteLine($"logits: max |diff| {Tolerance.MaxAbsDifference(last, logits):E2}");
    }

    private static List<GoldenCase> ReadManifest()
    {
        string path = Path.Combine(Root, "manifest.json");
        Assert.True(File.Exists(path), $"{path} is missing; see Golden/README.md");
        return JsonSerializer.Deserialize<List<GoldenCase>>(File.ReadAllText(path))!;
    }

    private sealed record GoldenCase(string Name, CheckpointSpec Spec, int[] Lengths, int[][] Sequences);
}
