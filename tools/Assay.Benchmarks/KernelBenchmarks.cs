using System.Diagnostics.CodeAnalysis;
using Assay.Config;
using Assay.Fixtures;
using Assay.Kernels;
using Assay.Model;
using BenchmarkDotNet.Attributes;
using BenchmarkDotNet.Configs;
using BenchmarkDotNet.Jobs;
using BenchmarkDotNet.Toolchains.InProcess.Emit;
using K = Assay.Kernels.CpuKernels;
using Assay.Weights;

namespace Assay.Benchmarks;

/// <summary>
/// BenchmarkDotNet runs of the engine's kernels at GPT-2 small's shapes (d 768, 12 heads, MLP 3,072, vocabulary
/// 50,257) on the path this CPU selects: <c>assay-bench kernels [BenchmarkDotNet arguments, e.g. --filter *Gemm*]</c>.
/// In-process, so no project is regenerated; BenchmarkDotNet reports medians with their error.
/// </summary>
[Config(typeof(InProcessConfig))]
[SuppressMessage("Performance", "CA1822:Mark members as static", Justification = "BenchmarkDotNet runs instance methods")]
public class KernelBenchmarks
{
    private const int D = 768, Inner = 3072, Vocabulary = 50257, Heads = 12, Tokens = 256;

    private static readonly AttentionShape AttentionHeadShape = new(Heads, Heads, D / Heads, 0);
    private readonly KernelVariant _variant = KernelSelector.Current;
    private AttentionScratch _attentionScratch = null!;
    private float[] _a = [], _c = [], _mlp = [], _gain = [], _bias = [], _qkv = [], _attention = [], _p = [], _phi = [], _logits = [];
    private PackedMatrix _qkvWeights = null!, _mlpIn = null!, _head = null!;

    /// <summary>Storage of the projection matrix in the GEMM benchmarks.</summary>
    [Params(WeightPrecision.Binary32, WeightPrecision.BFloat16, WeightPrecision.Integer8)]
    public WeightPrecision Weights { get; set; }

    [GlobalSetup]
    public void Setup()
    {
        var rng = new DeterministicRandom(3);
        float[] Normal(int count, double sd)
        {
            float[] v = new float[count];
            rng.FillNormal(v, sd);
            return v;
        }
        _a = Normal(Tokens * D, 1);
        _c = new float[Tokens * 3 * D];
        _mlp = new float[Tokens * Inner];
        _gain = Normal(D, 1);
        _bias = Normal(D, 0.1);
        _qkvWeights = PackedMatrix.FromRowMajor(Normal(D * 3 * D, 0.02), D, 3 * D, Normal(3 * D, 0.02), Weights);
        _mlpIn = PackedMatrix.FromRowMajor(Normal(D * Inner, 0.02), D, Inner, Normal(Inner, 0.02), Weights);
        _head = PackedMatrix.FromTransposed(Normal(Vocabulary * D, 0.02), D, Vocabulary,
            precision: Weights == WeightPrecision.Integer8 ? WeightPrecision.BFloat16 : Weights);
        _qkv = Normal(Tokens * 3 * D, 1);
        _attention = new float[Tokens * D];
        _attentionScratch = new AttentionScratch(AttentionHeadShape, Tokens);
        _logits = Normal(Vocabulary, 3);
        _p = new float[Vocabulary];
        _phi = new float[D];
    }

    /// <summary>The qkv projection of 256 tokens (256 × 768 · 768 × 2,304).</summary>
    [Benchmark]
    public void GemmQkv() => K.Gemm(_a, Tokens, D, _qkvWeights, _c, 3 * D, accumulate: false, _variant);

    /// <summary>The MLP input projection with the tanh GELU fused in its epilogue (256 × 768 · 768 × 3,072).</summary>
    [Benchmark]
    public void GemmMlpInGelu() => K.Gemm(_a, Tokens, D, _mlpIn, _mlp, Inner, accumulate: false, _variant, epilogue: Activation.GeluTanh);

    /// <summary>LayerNorm of 256 rows of 768.</summary>
    [Benchmark]
    public void LayerNorm() => K.LayerNorm(_a, _attention, Tokens, _gain, _bias, 1e-5f);

    /// <summary>One causal attention head over 256 positions.</summary>
    [Benchmark]
    public void AttentionHead() => K.CausalAttentionGroup(_qkv, _attention, Tokens, AttentionHeadShape, 0, 0, _attentionScratch.Blocks(Tokens), _attentionScratch, _variant);

    /// <summary>The next-word distribution: a stable softmax over the vocabulary.</summary>
    [Benchmark]
    public void Softmax()
    {
        _logits.CopyTo(_p, 0);
        K.SoftmaxInPlace(_p);
    }

    /// <summary>Φp over the vocabulary for one row (the conditional-mean feature).</summary>
    [Benchmark]
    public void ConditionalMean() => K.ConditionalMean(_p, 1, _head, _phi, _variant);

    private sealed class InProcessConfig : ManualConfig
    {
        public InProcessConfig()
        {
            AddJob(Job.Default.WithToolchain(InProcessEmitToolchain.Instance).WithWarmupCount(3).WithIterationCount(15));
        }
    }
}
