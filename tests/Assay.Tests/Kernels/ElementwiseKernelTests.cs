using System.Globalization;
using Assay.Config;
using Assay.Fixtures;
using Assay.Kernels;
using Assay.Tests.Support;
using K = Assay.Kernels.CpuKernels;

namespace Assay.Tests.Kernels;

/// <summary>LayerNorm, softmax, activations and attention against float64 references of their formulas.</summary>
public sealed class ElementwiseKernelTests
{
    public static TheoryData<int> Sizes => [1, 2, 7, 15, 16, 17, 63, 64, 65, 127, 128, 129, 255, 256, 257, 768, 1000];

    [Theory]
    [MemberData(nameof(Sizes))]
    public void LayerNorm_matches_reference(int n)
    {
        var rng = new DeterministicRandom((ulong)n);
        float[] x = GemmTests.Random(ref rng, 3 * n), g = GemmTests.Random(ref rng, n), b = GemmTests.Random(ref rng, n);
        for (int i = 0; i < x.Length; i++)
        {
            x[i] = (x[i] * 3) + 10; // an offset mean, where E[x²]−E[x]² would lose digits
        }
        float[] y = new float[x.Length];
        K.LayerNorm(x, y, 3, g, b, 1e-5f);
        double[] expected = ReferenceKernels.LayerNorm(x, g, b, 3, 1e-5);
        Tolerance.AssertClose(y, expected, n == 1 ? 1e-3 : 2e-5, 2e-5, $"LayerNorm n={n}");
    }

    [Theory]
    [MemberData(nameof(Sizes))]
    public void Softmax_matches_reference_and_survives_large_logits(int n)
    {
        var rng = new DeterministicRandom((ulong)n + 100);
        float[] x = GemmTests.Random(ref rng, n);
        x[0] = 1000f; // exp(1000) overflows float32 without the max subtraction
        double[] expected = ReferenceKernels.Softmax(x);
        K.SoftmaxInPlace(x);
        Tolerance.AssertClose(x, expected, 1e-7, 1e-5, $"softmax n={n}");
    }

    [Fact]
    public void Gelu_tanh_matches_its_formula()
    {
        float[] x = [.. Enumerable.Range(-2000, 4001).Select(i => i / 200f)];
        double[] expected = [.. x.Select(v => ReferenceKernels.GeluTanh(v))];
        K.Activate(x, Activation.GeluTanh);
        Tolerance.AssertClose(x, expected, 1e-6, 1e-5, "gelu (tanh)");
    }

    [Fact]
    public void Erf_matches_the_c_library()
    {
        // Outside reference: Python's math.erf (the C library's erf), run live.
        double[] points = [-4, -2.5, -1, -0.5, -0.1, 0, 1e-4, 0.1, 0.3, 0.5, 0.9, 1, 1.5, 2, 3, 5];
        string[] lines = PythonReference.Run("erf_values.py", [.. points.Select(p => p.ToString("R", CultureInfo.InvariantCulture))])
            .Split('\n', StringSplitOptions.RemoveEmptyEntries);
        for (int i = 0; i < points.Length; i++)
        {
            double expected = double.Parse(lines[i], CultureInfo.InvariantCulture);
            Assert.True(Math.Abs(K.Erf(points[i]) - expected) <= 2e-7, $"erf({points[i]}) = {K.Erf(points[i])}, libm {expected}");
        }
    }

    [Fact]
    public void Relu_clamps_negatives()
    {
        float[] x = [-2f, -0f, 0.5f, 3f];
        K.Activate(x, Activation.Relu);
        Assert.Equal([0f, 0f, 0.5f, 3f], x);
    }

    [Theory]
    [InlineData(1, 8, 1, 1, 0)]
    [InlineData(17, 40, 5, 5, 0)]
    [InlineData(64, 768, 12, 12, 0)]
    [InlineData(129, 136, 8, 8, 0)]
    [InlineData(33, 51, 3, 3, 0)]
    [InlineData(257, 96, 2, 2, 0)]
    // Grouped-query: 6 query heads on 2 key/value heads, 15 on 3 (groups of 5, not a power of two), with and without a window.
    [InlineData(40, 60, 6, 2, 0)]
    [InlineData(71, 120, 15, 3, 0)]
    [InlineData(71, 120, 15, 3, 9)]
    [InlineData(20, 24, 4, 1, 1)]
    public void Attention_matches_reference_with_the_same_bits_on_every_variant(int length, int width, int heads, int kvHeads, int window)
    {
        int hd = width / heads;
        var shape = new AttentionShape(heads, kvHeads, hd, window);
        var rng = new DeterministicRandom((ulong)(length * width));
        float[] qkv = GemmTests.Random(ref rng, length * shape.RowWidth);
        double[] expected = new double[length * width];
        for (int head = 0; head < heads; head++)
        {
            double[] one = ReferenceKernels.Attention(qkv, length, heads, kvHeads, hd, window, head);
            for (int i = 0; i < one.Length; i++)
            {
                expected[i] += one[i];
            }
        }
        float[]? first = null;
        foreach (KernelVariant v in Enum.GetValues<KernelVariant>().Where(KernelSelector.IsSupported))
        {
            float[] o = new float[length * width];
            for (int kv = 0; kv < kvHeads; kv++)
            {
                K.CausalAttentionGroup(qkv, o, length, shape, kv, new float[length], new float[hd * length], v);
            }
            Tolerance.AssertClose(o, expected, 1e-5, 1e-5, $"attention, {v}");
            // Each score and output element is the same in-order FMA chain on every path (tolerance 0).
            first ??= o;
            Assert.Equal(first, o);
        }
    }
}
