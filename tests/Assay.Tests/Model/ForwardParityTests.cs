using System.Text.Json;
using Assay.Fixtures;
using Assay.Kernels;
using Assay.Model;
using Assay.Tests.Support;
using Xunit.Abstractions;
using Assay.Weights;

namespace Assay.Tests.Model;

/// <summary>
/// The forward pass against independent numpy implementations (Debian python3-numpy, float64, run live:
/// Reference/gpt2_numpy.py for GPT-2, Reference/decoder_numpy.py for the Llama-style and NeoX families, both written
/// from the published architecture descriptions), which read the same checkpoint files with their own safetensors
/// parser. Every layer's hidden states and the logits must agree within atol 1e-4 + rtol 1e-4 (float32 engine vs
/// float64 reference).
/// </summary>
public sealed class ForwardParityTests(ITestOutputHelper output)
{
    private const double Atol = 1e-4;
    private const double Rtol = 1e-4;

    /// <summary>Checkpoints of the rotary families on odd shapes (shared with the feature and golden tests).</summary>
    public static readonly Dictionary<string, CheckpointSpec> Families = new()
    {
        ["llama-gqa-width60"] = new CheckpointSpec { Family = "llama", Width = 60, Heads = 6, KeyValueHeads = 2, Layers = 2, Context = 24, Inner = 100, Tied = false },
        ["llama3-scaled-bf16"] = new CheckpointSpec
        {
            Family = "llama", Width = 48, Heads = 3, KeyValueHeads = 1, Layers = 2, Context = 64, DType = "BF16", RopeTheta = 500000,
            RopeScaling = """{"rope_type": "llama3", "factor": 8.0, "low_freq_factor": 1.0, "high_freq_factor": 4.0, "original_max_position_embeddings": 8}""",
        },
        ["llama-headdim-linear-f16"] = new CheckpointSpec
        {
            Family = "llama", Width = 40, Heads = 5, HeadDim = 12, Layers = 2, Context = 20, DType = "F16", Shards = 2, Tied = false,
            RopeScaling = """{"type": "linear", "factor": 2.0}""",
        },
        ["mistral-window5"] = new CheckpointSpec { Family = "mistral", Width = 32, Heads = 4, KeyValueHeads = 2, Layers = 2, Context = 30, SlidingWindow = 5, Tied = false },
        ["qwen2-bias-window"] = new CheckpointSpec
        {
            Family = "qwen2", Width = 56, Heads = 7, KeyValueHeads = 1, Layers = 3, Context = 25, SlidingWindow = 6, MaxWindowLayers = 1, Inner = 88,
        },
        ["neox-parallel-pct06"] = new CheckpointSpec
        {
            Family = "gpt_neox", Width = 40, Heads = 4, Layers = 2, Context = 18, RotaryPct = 0.6, Activation = "gelu", Inner = 72, Tied = false,
        },
        ["neox-sequential-bf16"] = new CheckpointSpec
        {
            Family = "gpt_neox", Width = 48, Heads = 3, Layers = 2, Context = 21, RotaryPct = 0.25, ParallelResidual = false, Activation = "gelu",
            DType = "BF16", Tied = false,
        },
    };

    public static readonly Dictionary<string, (CheckpointSpec Spec, int[] Lengths)> Cases = new()
    {
        // Five heads of width 8: a head count that is odd and a width (40) that is not a multiple of 16.
        ["odd-heads-width40"] = (new CheckpointSpec { Width = 40, Heads = 5, Layers = 2, Context = 16 }, [1, 16, 7]),
        // Untied head, F16 storage, three heads of 12.
        ["untied-f16-width36"] = (new CheckpointSpec { Width = 36, Heads = 3, Layers = 3, Context = 12, Tied = false, DType = "F16" }, [12, 1, 5]),
        // BF16, "transformer." prefix, three shards with an index, no mask buffers.
        ["bf16-prefix-sharded"] = (new CheckpointSpec { Width = 48, Heads = 4, Layers = 2, Context = 20, DType = "BF16", Prefix = true, Shards = 3, MaskBuffers = false }, [20, 3]),
        // Exact GELU and an MLP width that is not 4·d.
        ["gelu-erf-inner100"] = (new CheckpointSpec { Width = 24, Heads = 2, Layers = 2, Context = 10, Activation = "gelu", Inner = 100 }, [10, 4]),
        // One head of odd width 17, one layer, ReLU.
        ["one-head-width17-relu"] = (new CheckpointSpec { Width = 17, Heads = 1, Layers = 1, Context = 9, Activation = "relu" }, [9, 2, 1]),
        // Width past one 64-column panel and more rows than one micro-tile batch.
        ["width136-long"] = (new CheckpointSpec { Width = 136, Heads = 4, Layers = 2, Context = 80, Vocabulary = 333 }, [80, 61, 1]),

        // Llama: six heads of 10 on two key/value heads (groups of 3), untied, an MLP width that is not a multiple of 16.
        ["llama-gqa-width60"] = (Families["llama-gqa-width60"], [24, 1, 9]),
        // Llama 3: llama3 rope scaling whose original context (8) the sequences pass, so all three frequency bands
        // (kept, divided, smoothed) matter; one key/value head for three query heads; tied; BF16.
        ["llama3-scaled-bf16"] = (Families["llama3-scaled-bf16"], [40, 5]),
        // Llama with head_dim 12 ≠ d / heads (5 heads on width 40), linear rope scaling ×2, F16, two shards.
        ["llama-headdim-linear-f16"] = (Families["llama-headdim-linear-f16"], [20, 7]),
        // Mistral: a sliding window of 5 over sequences up to 30, two key/value heads for four query heads.
        ["mistral-window5"] = (Families["mistral-window5"], [30, 3, 12]),
        // Qwen2: q/k/v biases, 7 query heads on one key/value head, the window (6) on layers 1 and 2 only, tied.
        ["qwen2-bias-window"] = (Families["qwen2-bias-window"], [25, 2]),
        // NeoX, parallel residual: heads of 10 with rotary_pct 0.6 (6 dims, an odd 3 rotary pairs), exact GELU, untied.
        ["neox-parallel-pct06"] = (Families["neox-parallel-pct06"], [18, 1, 6]),
        // NeoX, sequential residual, rotary_pct 0.25 of heads of 16, BF16, with the causal-mask and inv_freq buffers.
        ["neox-sequential-bf16"] = (Families["neox-sequential-bf16"], [21, 4]),
    };


    public static TheoryData<string, KernelVariant> CaseNames
    {
        get
        {
            var data = new TheoryData<string, KernelVariant>();
            foreach (string name in Cases.Keys)
            {
                foreach (KernelVariant v in Enum.GetValues<KernelVariant>().Where(KernelSelector.IsSupported))
                {
                    data.Add(name, v);
                }
            }
            return data;
        }
    }

    /// <summary>Every case on every kernel path this CPU runs; a BF16 checkpoint also held in bfloat16 (exact).</summary>
    [Theory]
    [MemberData(nameof(CaseNames))]
    public void Matches_numpy_reference(string name, KernelVariant variant)
    {
        (CheckpointSpec spec, int[] lengths) = Cases[name];
        string folder = Checkpoints.Folder(spec);
        int[][] sequences = RandomSequences(lengths, spec.Vocabulary, seed: 7);
        Compare(folder, spec, sequences, allLogits: true, variant,
            spec.DType == "BF16" ? [WeightPrecision.Binary32, WeightPrecision.BFloat16] : [WeightPrecision.Binary32]);
    }

    /// <summary>
    /// Every kernel path gives the same bits through the whole model (hidden states of every layer and all logits), as
    /// each output element is one in-order FMA chain on every path; the scalar path is the reference.
    /// </summary>
    [Theory]
    [InlineData("odd-heads-width40")]
    [InlineData("width136-long")]
    [InlineData("untied-f16-width36")]
    [InlineData("llama-gqa-width60")]
    [InlineData("qwen2-bias-window")]
    [InlineData("neox-parallel-pct06")]
    public void Every_kernel_path_gives_the_same_bits_through_the_model(string name)
    {
        (CheckpointSpec spec, int[] lengths) = Cases[name];
        LanguageModel model = LanguageModel.Open(Checkpoints.Folder(spec));
        int[][] sequences = RandomSequences(lengths, spec.Vocabulary, seed: 9);
        var options = new ForwardOptions { HiddenLayers = [.. Enumerable.Range(0, spec.Layers + 1)], Logits = LogitPositions.All };
        ForwardResult scalar = model.Forward(sequences, options, KernelVariant.Scalar);
        foreach (KernelVariant v in Enum.GetValues<KernelVariant>().Where(KernelSelector.IsSupported))
        {
            ForwardResult r = model.Forward(sequences, options, v);
            for (int s = 0; s < sequences.Length; s++)
            {
                for (int t = 0; t < sequences[s].Length; t++)
                {
                    for (int l = 0; l <= spec.Layers; l++)
                    {
                        Assert.True(scalar.HiddenState(l, s, t).SequenceEqual(r.HiddenState(l, s, t)), $"{v}: layer {l}, sequence {s}, position {t}");
                    }
                    Assert.True(scalar.Logits(s, t).SequenceEqual(r.Logits(s, t)), $"{v}: logits of sequence {s}, position {t}");
                }
            }
        }
    }

    /// <summary>The published GPT-2 small shape at full context (1024 tokens) and at lengths 7 and 1.</summary>
    [Fact]
    public void Matches_numpy_reference_at_gpt2_small_shape()
    {
        CheckpointSpec spec = CheckpointSpec.Gpt2Small;
        string folder = Checkpoints.Folder(spec);
        int[][] sequences = RandomSequences([1024, 7, 1], spec.Vocabulary, seed: 11);
        Compare(folder, spec, sequences, allLogits: false, KernelSelector.Current, [WeightPrecision.Binary32]);
    }

    private void Compare(string folder, CheckpointSpec spec, int[][] sequences, bool allLogits, KernelVariant variant,
        WeightPrecision[] precisions)
    {
        using var temp = new TempFolder();
        string seqPath = temp.File("sequences.json");
        File.WriteAllText(seqPath, JsonSerializer.Serialize(sequences));
        string outDir = temp.File("out");
        PythonReference.Run(spec.Family == "gpt2" ? "gpt2_numpy.py" : "decoder_numpy.py", [folder, seqPath, outDir, .. allLogits ? ["--all-logits"] : Array.Empty<string>()]);

        foreach (WeightPrecision precision in precisions)
        {
            output.WriteLine($"weights {precision}");
            CompareOutputs(LanguageModel.Open(folder, precision), spec, sequences, allLogits, variant, outDir);
        }
    }

    private void CompareOutputs(LanguageModel model, CheckpointSpec spec, int[][] sequences, bool allLogits, KernelVariant variant, string outDir)
    {
        int layers = spec.Layers;
        ForwardResult r = model.Forward(sequences, new ForwardOptions
        {
            HiddenLayers = [.. Enumerable.Range(0, layers + 1)],
            Logits = allLogits ? LogitPositions.All : LogitPositions.Last,
        }, variant);

        int d = spec.Width;
        for (int k = 0; k <= layers; k++)
        {
            (double[] expected, int[] shape) = Npy.Read(Path.Combine(outDir, $"hidden_{k}.npy"));
            Assert.Equal([sequences.Sum(s => s.Length), d], shape);
            float[] actual = Concatenate(sequences, (s, t) => r.HiddenState(k, s, t), d);
            Tolerance.AssertClose(actual, expected, Atol, Rtol, $"hidden state of layer {k}");
            output.WriteLine($"layer {k}: max |diff| {Tolerance.MaxAbsDifference(actual, expected):E2}");
        }

        int v = spec.Vocabulary;
        (double[] last, _) = Npy.Read(Path.Combine(outDir, "logits_last.npy"));
        float[] lastActual = new float[sequences.Length * v];
        for (int s = 0; s < sequences.Length; s++)
        {
            r.LastLogits(s).CopyTo(lastActual.AsSpan(s * v));
        }
        Tolerance.AssertClose(lastActual, last, Atol, Rtol, "last-position logits");
        output.WriteLine($"logits (last): max |diff| {Tolerance.MaxAbsDifference(lastActual, last):E2}");

        if (allLogits)
        {
            (double[] all, _) = Npy.Read(Path.Combine(outDir, "logits_all.npy"));
            float[] allActual = Concatenate(sequences, r.Logits, v);
            Tolerance.AssertClose(allActual, all, Atol, Rtol, "all-position logits");
        }
    }

    private delegate ReadOnlySpan<float> RowOf(int sequence, int position);

    private static float[] Concatenate(int[][] sequences, RowOf row, int width)
    {
        float[] all = new float[sequences.Sum(s => s.Length) * width];
        int offset = 0;
        for (int s = 0; s < sequences.Length; s++)
        {
            for (int t = 0; t < sequences[s].Length; t++)
            {
                row(s, t).CopyTo(all.AsSpan(offset));
                offset += width;
            }
        }
        return all;
    }

    internal static int[][] RandomSequences(int[] lengths, int vocabulary, ulong seed)
    {
        var rng = new DeterministicRandom(seed);
        return [.. lengths.Select(n => Enumerable.Range(0, n).Select(_ => (int)(rng.NextUInt64() % (ulong)vocabulary)).ToArray())];
    }
}
