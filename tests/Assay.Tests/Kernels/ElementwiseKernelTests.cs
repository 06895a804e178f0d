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
    public void Lane_sums_give_one_order_on_every_variant(int n)
    {
        // The order written out here in scalar code: element i into lane i mod 16, each lane in order, then the lanes
        // added in halves (j += j + 8, + 4, + 2, + 1). Every variant must give its bits; the value is checked against the
        // float64 sum (common practice: float32 summation error ≤ n·ε·Σ|x|).
        var rng = new DeterministicRandom(1000 + (ulong)n);
        float[] x = GemmTests.Random(ref rng, n);
        foreach (bool squares in new[] { false, true })
        {
            float[] lanes = new float[16];
            for (int i = 0; i < n; i++)
            {
                lanes[i % 16] += squares ? x[i] * x[i] : x[i];
            }
            for (int w = 8; w >= 1; w /= 2)
            {
                for (int j = 0; j < w; j++)
                {
                    lanes[j] += lanes[j + w];
                }
            }
            double exact = x.Sum(v => squares ? (double)v * v : v), magnitude = x.Sum(v => squares ? (double)v * v : Math.Abs(v));
            foreach (KernelVariant variant in Enum.GetValues<KernelVariant>().Where(KernelSelector.IsSupported))
            {
                float sum = K.LaneSum(x, squares, variant);
                Assert.Equal(BitConverter.SingleToInt32Bits(lanes[0]), BitConverter.SingleToInt32Bits(sum));
                Assert.True(Math.Abs(sum - exact) <= n * 6e-8 * magnitude, $"{variant} n={n}: {sum} against {exact}");
            }
        }
    }

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
    // Several query blocks and key panels: head width 64 at 300 positions; 128 and 80 (two value panels, the second
    // padded); groups of 4 and 7; windows wider and narrower than a block.
    [InlineData(300, 256, 4, 4, 0)]
    [InlineData(200, 256, 2, 2, 0)]
    [InlineData(150, 160, 2, 1, 0)]
    [InlineData(130, 256, 8, 2, 0)]
    [InlineData(97, 224, 14, 2, 0)]
    [InlineData(300, 128, 2, 2, 100)]
    [InlineData(130, 256, 8, 2, 5)]
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
        float[] inOrder = InOrderAttention(qkv, length, shape);
        var scratch = new AttentionScratch(shape, length);
        int blocks = scratch.Blocks(length);
        foreach (KernelVariant v in Enum.GetValues<KernelVariant>().Where(KernelSelector.IsSupported))
        {
            float[] o = new float[length * width];
            for (int kv = 0; kv < kvHeads; kv++)
            {
                K.CausalAttentionGroup(qkv, o, length, shape, kv, 0, blocks, scratch, v);
            }
            Tolerance.AssertClose(o, expected, 1e-5, 1e-5, $"attention, {v}");
            // Each score and output element is the same in-order FMA chain as a plain loop per row, on every path
            // and however the blocks are split between calls (tolerance 0).
            Assert.Equal(inOrder, o);
            float[] split = new float[length * width];
            int[] cuts = [0, blocks / 3, (2 * blocks) / 3, blocks];
            for (int kv = kvHeads - 1; kv >= 0; kv--)
            {
                for (int c = 2; c >= 0; c--)
                {
                    K.CausalAttentionGroup(qkv, split, length, shape, kv, cuts[c], cuts[c + 1], scratch, v);
                }
            }
            Assert.Equal(inOrder, split);
        }
    }

    /// <summary>
    /// Attention one query row at a time in float32: each score one FMA chain over the head's columns in order, scaled,
    /// the engine's softmax over exactly the positions the row sees, each output element one FMA chain over those
    /// positions in order: the arithmetic the blocked kernel promises to reproduce bit for bit.
    /// </summary>
    private static float[] InOrderAttention(float[] qkv, int length, AttentionShape shape)
    {
        int hd = shape.HeadWidth, stride = shape.RowWidth, width = shape.Heads * hd, group = shape.Heads / shape.KeyValueHeads;
        float scale = 1f / MathF.Sqrt(hd);
        float[] o = new float[length * width];
        for (int head = 0; head < shape.Heads; head++)
        {
            int kv = head / group, k0 = (shape.Heads + kv) * hd, v0 = (shape.Heads + shape.KeyValueHeads + kv) * hd;
            for (int t = 0; t < length; t++)
            {
                int first = shape.Window > 0 ? Math.Max(0, t - shape.Window + 1) : 0;
                float[] s = new float[t - first + 1];
                for (int j = first; j <= t; j++)
                {
                    float dot = 0f;
                    for (int c = 0; c < hd; c++)
                    {
                        dot = MathF.FusedMultiplyAdd(qkv[(t * stride) + (head * hd) + c], qkv[(j * stride) + k0 + c], dot);
                    }
                    s[j - first] = dot * scale;
                }
                K.SoftmaxInPlace<float>(s);
                for (int c = 0; c < hd; c++)
                {
                    float acc = 0f;
                    for (int j = first; j <= t; j++)
                    {
                        acc = MathF.FusedMultiplyAdd(s[j - first], qkv[(j * stride) + v0 + c], acc);
                    }
                    o[(t * width) + (head * hd) + c] = acc;
                }
            }
        }
        return o;
    }
}
