using System.Text.Json;
using Assay.Fixtures;
using Assay.TorchReference;
using TorchSharp;
using static TorchSharp.torch;

// assay-torch-reference <golden-dir>
// Computes every case's hidden states (all layers) and last-position logits with libtorch ops in float64 — for
// GPT-2 layer_norm, gelu (tanh), scaled_dot_product_attention (causal), matmul; for the rotary families (FamilyForward.cs)
// the same with RMSNorm from mean/rsqrt, rotary positions from cos/sin, silu, exact gelu, grouped key/value heads by
// repeat_interleave and sliding windows as a boolean mask — on the synthetic checkpoints of Assay.Fixtures, and writes
// them as float32 .npy files with a manifest the engine's golden tests read.
if (args.Length != 1)
{
    Console.Error.WriteLine("usage: assay-torch-reference <golden-dir>");
    return 2;
}
string root = args[0];
Directory.CreateDirectory(root);
torch.set_num_threads(2);

var cases = new List<GoldenCase>
{
    new("odd-heads-width40", new CheckpointSpec { Width = 40, Heads = 5, Layers = 2, Context = 16 }, [16, 1, 9]),
    new("untied-f16-width36", new CheckpointSpec { Width = 36, Heads = 3, Layers = 3, Context = 12, Tied = false, DType = "F16" }, [12, 5]),
    new("bf16-width64", new CheckpointSpec { Width = 64, Heads = 4, Layers = 2, Context = 24, DType = "BF16", Prefix = true }, [24, 2]),
    new("gpt2-small", CheckpointSpec.Gpt2Small, [8, 1]),
    new("llama-gqa-width60", new CheckpointSpec { Family = "llama", Width = 60, Heads = 6, KeyValueHeads = 2, Layers = 2, Context = 24, Inner = 100, Tied = false }, [24, 1, 9]),
    new("llama3-scaled-bf16", new CheckpointSpec
    {
        Family = "llama", Width = 48, Heads = 3, KeyValueHeads = 1, Layers = 2, Context = 64, DType = "BF16", RopeTheta = 500000,
        RopeScaling = """{"rope_type": "llama3", "factor": 8.0, "low_freq_factor": 1.0, "high_freq_factor": 4.0, "original_max_position_embeddings": 8}""",
    }, [40, 5]),
    new("mistral-window5", new CheckpointSpec { Family = "mistral", Width = 32, Heads = 4, KeyValueHeads = 2, Layers = 2, Context = 30, SlidingWindow = 5, Tied = false }, [30, 3]),
    new("qwen2-bias-window", new CheckpointSpec
    {
        Family = "qwen2", Width = 56, Heads = 7, KeyValueHeads = 1, Layers = 3, Context = 25, SlidingWindow = 6, MaxWindowLayers = 1, Inner = 88,
    }, [25, 2]),
    new("neox-parallel-pct06", new CheckpointSpec
    {
        Family = "gpt_neox", Width = 40, Heads = 4, Layers = 2, Context = 18, RotaryPct = 0.6, Activation = "gelu", Inner = 72, Tied = false,
    }, [18, 6]),
    new("neox-sequential-bf16", new CheckpointSpec
    {
        Family = "gpt_neox", Width = 48, Heads = 3, Layers = 2, Context = 21, RotaryPct = 0.25, ParallelResidual = false, Activation = "gelu",
        DType = "BF16", Tied = false,
    }, [21, 4]),
};

foreach (GoldenCase c in cases)
{
    string dir = Path.Combine(root, c.Name);
    Directory.CreateDirectory(dir);
    int[][] sequences = Sequences(c.Lengths, c.Spec.Vocabulary);
    c.Sequences = sequences;
    Dictionary<string, Tensor> p = SyntheticCheckpoint.Parameters(c.Spec)
        .ToDictionary(sp => sp.Name, sp => tensor(sp.Values.Select(v => (double)v).ToArray(), sp.Shape, ScalarType.Float64));
    if (c.Spec.Family == "gpt2")
    {
        Forward(c.Spec, p, sequences, dir);
    }
    else
    {
        (List<Tensor>[] hidden, List<Tensor> last) = FamilyForward.Run(c.Spec, p, sequences);
        for (int k = 0; k < hidden.Length; k++)
        {
            Save(Path.Combine(dir, $"hidden_{k}.npy"), cat(hidden[k], 0));
        }
        Save(Path.Combine(dir, "logits_last.npy"), stack(last));
    }
    Console.WriteLine($"{c.Name}: {sequences.Length} sequences written to {dir}");
}

File.WriteAllText(Path.Combine(root, "manifest.json"), JsonSerializer.Serialize(cases, new JsonSerializerOptions { WriteIndented = true }));
return 0;

static void Forward(CheckpointSpec s, Dictionary<string, Tensor> p, int[][] sequences, string dir)
{
    string pre = s.Prefix ? "transformer." : "";
    long d = s.Width, h = s.Heads, hd = d / h;
    Tensor wte = p[pre + "wte.weight"], wpe = p[pre + "wpe.weight"];
    Tensor head = s.Tied ? wte : p["lm_head.weight"];
    var hidden = Enumerable.Range(0, s.Layers + 1).Select(_ => new List<Tensor>()).ToList();
    var last = new List<Tensor>();
    using var noGrad = torch.no_grad();
    foreach (int[] seq in sequences)
    {
        long t = seq.Length;
        Tensor x = wte.index_select(0, tensor(seq.Select(i => (long)i).ToArray())) + wpe.narrow(0, 0, t);
        hidden[0].Add(x);
        for (int l = 0; l < s.Layers; l++)
        {
            string b = $"{pre}h.{l}.";
            Tensor n1 = nn.functional.layer_norm(x, [d], p[b + "ln_1.weight"], p[b + "ln_1.bias"], 1e-5);
            Tensor qkv = n1.matmul(p[b + "attn.c_attn.weight"]) + p[b + "attn.c_attn.bias"];
            Tensor[] parts = qkv.split(d, -1);
            Tensor q = parts[0].reshape(t, h, hd).transpose(0, 1);
            Tensor k = parts[1].reshape(t, h, hd).transpose(0, 1);
            Tensor v = parts[2].reshape(t, h, hd).transpose(0, 1);
            Tensor a = nn.functional.scaled_dot_product_attention(q, k, v, null, 0.0, true).transpose(0, 1).reshape(t, d);
            x = x + a.matmul(p[b + "attn.c_proj.weight"]) + p[b + "attn.c_proj.bias"];
            Tensor n2 = nn.functional.layer_norm(x, [d], p[b + "ln_2.weight"], p[b + "ln_2.bias"], 1e-5);
            Tensor m = nn.functional.gelu(n2.matmul(p[b + "mlp.c_fc.weight"]) + p[b + "mlp.c_fc.bias"], TorchSharp.Modules.GELU.Approximate.tanh, false);
            x = x + m.matmul(p[b + "mlp.c_proj.weight"]) + p[b + "mlp.c_proj.bias"];
            if (l + 1 < s.Layers)
            {
                hidden[l + 1].Add(x);
            }
        }
        Tensor y = nn.functional.layer_norm(x, [d], p[pre + "ln_f.weight"], p[pre + "ln_f.bias"], 1e-5);
        hidden[s.Layers].Add(y);
        last.Add(y[^1].matmul(head.t()));
    }
    for (int k = 0; k <= s.Layers; k++)
    {
        Save(Path.Combine(dir, $"hidden_{k}.npy"), cat(hidden[k], 0));
    }
    Save(Path.Combine(dir, "logits_last.npy"), stack(last));
}

static void Save(string path, Tensor t)
{
    Tensor f = t.to_type(ScalarType.Float32).contiguous();
    NpyWriter.Write(path, f.data<float>().ToArray(), f.shape);
}

static int[][] Sequences(int[] lengths, int vocabulary)
{
    var rng = new DeterministicRandom(2026);
    return [.. lengths.Select(n => Enumerable.Range(0, n).Select(_ => (int)(rng.NextUInt64() % (ulong)vocabulary)).ToArray())];
}

/// <summary>One golden case: the checkpoint spec, the token sequences and (in the manifest) where the outputs are.</summary>
internal sealed record GoldenCase(string Name, CheckpointSpec Spec, int[] Lengths)
{
    public int[][] Sequences { get; set; } = [];
}
