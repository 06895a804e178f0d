using System.Text.Json;
using Assay.Fixtures;
using Assay.Model;
using Assay.Tests.Support;
using Xunit.Abstractions;
using Assay.Weights;

namespace Assay.Tests.Model;

/// <summary>
/// The forward pass against golden outputs computed with libtorch ops (layer_norm, tanh and exact GELU, silu, causal
/// and windowed scaled_dot_product_attention, repeat_interleave for grouped key/value heads, rotary positions from
/// cos/sin) by tools/Assay.TorchReference, for GPT-2 and for each rotary family (Llama, Llama 3 scaling, Mistral's
/// window, Qwen2's biases and window, NeoX parallel and sequential); see Golden/README.md for the command that made them.
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

    [Fact]
    public void A_bfloat16_checkpoint_held_in_bfloat16_matches_libtorch_with_the_same_bits_as_float32()
    {
        // Widening bfloat16 to float32 is exact, and the kernels do the same float32 arithmetic on either storage.
        GoldenCase c = ReadManifest().Single(x => x.Spec.DType == "BF16" && x.Spec.Family == "gpt2");
        string folder = Checkpoints.Folder(c.Spec);
        var options = new ForwardOptions { HiddenLayers = [c.Spec.Layers] };
        ForwardResult full = LanguageModel.Open(folder).Forward(c.Sequences, options);
        LanguageModel half = LanguageModel.Open(folder, WeightPrecision.BFloat16);
        Assert.Equal(WeightPrecision.BFloat16, half.Precision);
        ForwardResult r = half.Forward(c.Sequences, options);
        for (int s = 0; s < c.Sequences.Length; s++)
        {
            Assert.Equal(full.LastLogits(s).ToArray(), r.LastLogits(s).ToArray());
            Assert.Equal(full.HiddenState(c.Spec.Layers, s, 0).ToArray(), r.HiddenState(c.Spec.Layers, s, 0).ToArray());
        }
        (double[] logits, _) = Npy.Read(Path.Combine(Root, c.Name, "logits_last.npy"));
        Tolerance.AssertClose([.. Enumerable.Range(0, c.Sequences.Length).SelectMany(s => r.LastLogits(s).ToArray())], logits, 1e-4, 1e-4, $"{c.Name} bf16 logits");
    }

    private static List<GoldenCase> ReadManifest()
    {
        string path = Path.Combine(Root, "manifest.json");
        Assert.True(File.Exists(path), $"{path} is missing; see Golden/README.md");
        return JsonSerializer.Deserialize<List<GoldenCase>>(File.ReadAllText(path))!;
    }

    private sealed record GoldenCase(string Name, CheckpointSpec Spec, int[] Lengths, int[][] Sequences);
}
