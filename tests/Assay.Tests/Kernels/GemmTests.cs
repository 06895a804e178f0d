using Assay.Fixtures;
using Assay.Config;
using Assay.Kernels;
using Assay.Model;
using K = Assay.Kernels.CpuKernels;
using Assay.Weights;

namespace Assay.Tests.Kernels;

/// <summary>Every GEMM variant against the float64 reference, on sizes 0–257 and transformer shapes.</summary>
public sealed class GemmTests
{
    public static TheoryData<KernelVariant> Variants =>
        [.. Enum.GetValues<KernelVariant>().Where(KernelSelector.IsSupported)];

    public static TheoryData<Int8Kernel> Int8Kernels =>
        [.. Enum.GetValues<Int8Kernel>().Where(KernelSelector.IsSupported)];

    private static readonly int[] Ms = [0, 1, 2, 3, 5, 6, 7, 12, 13, 48, 49, 257];
    private static readonly int[] Ns = [1, 3, 16, 31, 63, 64, 65, 130, 257];
    private static readonly int[] Ks = [1, 2, 17, 64, 255];

    [Theory]
    [MemberData(nameof(Variants))]
    public void Matches_reference_on_small_and_ragged_sizes(KernelVariant variant)
    {
        var rng = new DeterministicRandom(3);
        foreach (int m in Ms)
        {
            foreach (int n in Ns)
            {
                foreach (int k in Ks)
                {
                    Check(variant, m, n, k, ref rng, bias: (m + n) % 2 == 0, accumulate: (m + k) % 3 == 0);
                }
            }
        }
    }

    [Theory]
    [MemberData(nameof(Variants))]
    public void Matches_reference_at_transformer_shapes(KernelVariant variant)
    {
        var rng = new DeterministicRandom(5);
        Check(variant, 256, 2304, 768, ref rng, bias: true, accumulate: false);   // GPT-2 small qkv
        Check(variant, 37, 768, 3072, ref rng, bias: true, accumulate: true);     // MLP out with residual
    }

    [Theory]
    [MemberData(nameof(Variants))]
    public void Each_row_is_independent_of_the_batch_and_the_threads(KernelVariant variant)
    {
        // Row r of C must be bit-identical whether computed alone or among 300 rows (split over threads). K = 600
        // spans five depth blocks: among 300 rows the full tiles run block by block through C, alone the row is a
        // ragged tile that runs in one pass, so this also checks that blocking keeps each chain's bits.
        var rng = new DeterministicRandom(9);
        int m = 300, k = 600, n = 150;
        float[] a = Random(ref rng, m * k), b = Random(ref rng, k * n), bias = Random(ref rng, n), residual = Random(ref rng, m * n);
        foreach (WeightPrecision precision in Enum.GetValues<WeightPrecision>())
        {
            PackedMatrix pb = PackedMatrix.FromRowMajor(b, k, n, bias, precision);
            foreach (bool accumulate in new[] { false, true })
            {
                float[] all = (float[])residual.Clone();
                K.Gemm(a, m, k, pb, all, n, accumulate, variant);
                foreach (int r in new[] { 0, 5, 157, 299 })
                {
                    float[] one = residual.AsSpan(r * n, n).ToArray();
                    K.Gemm(a.AsSpan(r * k, k), 1, k, pb, one, n, accumulate, variant);
                    Assert.Equal(one, all.AsSpan(r * n, n).ToArray());
                }
            }
        }
    }

    [Fact]
    public void Transposed_pack_is_the_transpose()
    {
        var rng = new DeterministicRandom(1);
        float[] bt = Random(ref rng, 70 * 9);   // N = 70 rows of K = 9
        PackedMatrix p = PackedMatrix.FromTransposed(bt, 9, 70);
        float[] col = new float[9];
        for (int nIndex = 0; nIndex < 70; nIndex++)
        {
            p.CopyColumn(nIndex, col);
            Assert.Equal(bt.AsSpan(nIndex * 9, 9).ToArray(), col);
        }
    }

    [Theory]
    [MemberData(nameof(Variants))]
    public void BFloat16_panels_match_the_reference_on_the_rounded_matrix(KernelVariant variant)
    {
        // The reference is the float64 product with B rounded to bfloat16 by RoundToBFloat16 below, so only the
        // float32 accumulation error remains, as for float32 panels.
        var rng = new DeterministicRandom(21);
        foreach ((int m, int n, int k) in Grid())
        {
            float[] a = Random(ref rng, m * k), b = Random(ref rng, k * n), bias = Random(ref rng, n);
            float[] c = Random(ref rng, m * n);
            float[] c0 = (float[])c.Clone();
            double[] expected = ReferenceKernels.Gemm(a, [.. b.Select(RoundToBFloat16)], bias, c0, m, k, n);
            K.Gemm(a, m, k, PackedMatrix.FromRowMajor(b, k, n, bias, WeightPrecision.BFloat16), c, n, accumulate: true, variant);
            for (int i = 0; i < expected.Length; i++)
            {
                double tol = 1e-5 * Math.Sqrt(k) * Math.Max(1, Math.Abs(expected[i]));
                Assert.True(Math.Abs(c[i] - expected[i]) <= tol, $"{variant} bf16 m={m} n={n} k={k}: C[{i}] = {c[i]}, expected {expected[i]}");
            }
        }
    }

    [Theory]
    [InlineData(WeightPrecision.Binary32, 95)]
    [InlineData(WeightPrecision.BFloat16, 96)]
    [InlineData(WeightPrecision.Integer8, 97)]
    public void Reduced_precision_panels_give_the_same_bits_on_every_path_and_with_the_activation_fused(WeightPrecision precision, int k)
    {
        var rng = new DeterministicRandom(22);
        int m = 50, n = 200;
        float[] a = Random(ref rng, m * k), b = Random(ref rng, k * n), bias = Random(ref rng, n);
        PackedMatrix packed = PackedMatrix.FromRowMajor(b, k, n, bias, precision);
        Assert.Equal(precision, packed.Precision);
        float[] scalar = new float[m * n];
        K.Gemm(a, m, k, packed, scalar, n, accumulate: false, KernelVariant.Scalar, int8: Int8Kernel.Scalar);
        float[] activated = (float[])scalar.Clone();
        K.Activate(activated, Activation.GeluTanh);
        foreach (KernelVariant variant in Enum.GetValues<KernelVariant>().Where(KernelSelector.IsSupported))
        {
            foreach (Int8Kernel integer in Enum.GetValues<Int8Kernel>().Where(KernelSelector.IsSupported))
            {
                float[] c = new float[m * n];
                K.Gemm(a, m, k, packed, c, n, accumulate: false, variant, int8: integer);
                Assert.Equal(scalar, c);
                float[] fused = new float[m * n];
                K.Gemm(a, m, k, packed, fused, n, accumulate: false, variant, epilogue: Activation.GeluTanh, int8: integer);
                Assert.Equal(activated, fused);
            }
        }
    }

    [Fact]
    public void BFloat16_rounding_is_to_nearest_even()
    {
        // Common practice: bfloat16 keeps float32's sign, exponent and top 7 fraction bits, rounded to nearest with
        // ties to even (IEEE 754's default rounding). RoundToBFloat16 does it in float64 arithmetic, not with bits.
        var rng = new DeterministicRandom(23);
        float[] values = Random(ref rng, 20000);
        float[] edges = [0f, -0f, 1f, 1.00390625f, 1.01171875f, 1.005859375f, 3.0e38f, 1e-38f, float.Epsilon, -2.5f, 65504f];
        foreach (float x in values.Concat(edges))
        {
            float widened = PackedMatrix.Widen((uint)PackedMatrix.ToBFloat16(x) << 16, upper: true);
            Assert.Equal(RoundToBFloat16(x), widened);
        }
        Assert.Equal(1f, PackedMatrix.Widen((uint)PackedMatrix.ToBFloat16(1.00390625f) << 16, upper: true));        // tie, to even
        Assert.Equal(1.015625f, PackedMatrix.Widen((uint)PackedMatrix.ToBFloat16(1.01171875f) << 16, upper: true));  // tie, to even (up)
        Assert.True(float.IsNaN(PackedMatrix.Widen((uint)PackedMatrix.ToBFloat16(float.NaN) << 16, upper: true)));
    }

    [Fact]
    public void BFloat16_transposed_pack_is_the_rounded_transpose()
    {
        var rng = new DeterministicRandom(24);
        float[] bt = Random(ref rng, 130 * 9);
        PackedMatrix p = PackedMatrix.FromTransposed(bt, 9, 130, precision: WeightPrecision.BFloat16);
        float[] col = new float[9];
        for (int nIndex = 0; nIndex < 130; nIndex++)
        {
            p.CopyColumn(nIndex, col);
            Assert.Equal(bt.AsSpan(nIndex * 9, 9).ToArray().Select(RoundToBFloat16).ToArray(), col);
        }
        Assert.Equal(3 * 9 * 32 * 4, p.Bytes);   // half of the 3 × 9 × 64 float32 panels
    }

    [Theory]
    [InlineData(false)]
    [InlineData(true)]
    public void BFloat16_packing_rounds_every_value_as_the_rounding_reference(bool transposed)
    {
        // The packer rounds eight values at a time; each must equal RoundToBFloat16 (float64 arithmetic, ties to even),
        // ties, the largest finite values, subnormals and signed zeros included, at ragged edges of panels and blocks.
        var rng = new DeterministicRandom(26);
        float[] edges = [1.00390625f, 1.01171875f, -1.00390625f, 3.0e38f, -3.3e38f, float.MaxValue, 1e-38f, -1e-39f, float.Epsilon, 0f, -0f, 65504f];
        int k = 37, n = 131;
        float[] values = Random(ref rng, k * n);
        for (int i = 0; i < values.Length; i += 7)
        {
            values[i] = edges[(i / 7) % edges.Length];
        }
        PackedMatrix p = transposed
            ? PackedMatrix.FromTransposed(values, k, n, precision: WeightPrecision.BFloat16)
            : PackedMatrix.FromRowMajor(values, k, n, precision: WeightPrecision.BFloat16);
        float[] column = new float[k];
        for (int j = 0; j < n; j++)
        {
            p.CopyColumn(j, column);
            for (int r = 0; r < k; r++)
            {
                float x = transposed ? values[(j * k) + r] : values[(r * n) + j];
                Assert.Equal(BitConverter.SingleToInt32Bits(RoundToBFloat16(x)), BitConverter.SingleToInt32Bits(column[r]));
            }
        }
    }

    [Theory]
    [MemberData(nameof(Int8Kernels))]
    public void Int8_panels_give_the_product_of_the_quantized_operands(Int8Kernel variant)
    {
        // Reference (float64): Σ_k (t_r·qa_rk)·(s_n·q_kn) + bias, with the operands quantized here in scalar code:
        // symmetric per row of A and per column of B, largest magnitude → 127, round half to even (common practice).
        // Then a bound against the unquantized float64 product: rounding moves each operand by at most half a step.
        var rng = new DeterministicRandom(25);
        foreach ((int m, int n, int k) in Grid().Append((300, 70, 768)))
        {
            float[] a = Random(ref rng, m * k), b = Random(ref rng, k * n), bias = Random(ref rng, n);
            float[] c = Random(ref rng, m * n);
            float[] c0 = (float[])c.Clone();
            K.Gemm(a, m, k, PackedMatrix.FromRowMajor(b, k, n, bias, WeightPrecision.Integer8), c, n, accumulate: true, KernelVariant.Scalar, int8: variant);
            (float[] qa, float[] t) = Quantize(a, m, k, byRow: true);
            (float[] qb, float[] s) = Quantize(b, k, n, byRow: false);
            for (int r = 0; r < m; r++)
            {
                for (int j = 0; j < n; j++)
                {
                    double exact = 0, quantized = 0, bound = 0;
                    for (int p = 0; p < k; p++)
                    {
                        double x = a[(r * k) + p], y = b[(p * n) + j];
                        exact += x * y;
                        quantized += (t[r] * (double)qa[(r * k) + p]) * (s[j] * (double)qb[(p * n) + j]);
                        bound += (0.5 * t[r] * Math.Abs(y)) + (0.5 * s[j] * Math.Abs(x)) + (0.25 * t[r] * s[j]);
                    }
                    double actual = c[(r * n) + j] - (double)c0[(r * n) + j] - bias[j];
                    double tol = 1e-5 * Math.Sqrt(k) * Math.Max(1, Math.Abs(quantized)) + 1e-6 * Math.Abs(c0[(r * n) + j]);
                    Assert.True(Math.Abs(actual - quantized) <= tol, $"{variant} int8 m={m} n={n} k={k}: C[{r},{j}] − C0 − bias = {actual}, expected {quantized}");
                    Assert.True(Math.Abs(actual - exact) <= bound + tol, $"{variant} int8 m={m} n={n} k={k}: error {Math.Abs(actual - exact)} beyond the rounding bound {bound}");
                }
            }
        }
    }

    /// <summary>
    /// An [out, in] matrix packed (a panel of rows at a time, gathered in 8 × 8 tiles where AVX is there) holds the same
    /// values as its transpose packed row-major: float32 panels, bfloat16 pairs, and int8 bytes, scales, sums and bias.
    /// </summary>
    [Theory]
    [InlineData(9, 70)]
    [InlineData(13, 130)]
    [InlineData(4, 1)]
    [InlineData(40, 64)]
    [InlineData(33, 200)]
    public void Transposed_pack_equals_the_row_major_pack_of_the_transpose(int k, int n)
    {
        var rng = new DeterministicRandom((ulong)(k * n));
        float[] bt = Random(ref rng, n * k);
        float[] bias = Random(ref rng, n);
        float[] b = new float[k * n];
        for (int r = 0; r < k; r++)
        {
            for (int c = 0; c < n; c++)
            {
                b[(r * n) + c] = bt[(c * k) + r];
            }
        }
        PackedMatrix t = PackedMatrix.FromTransposed(bt, k, n, bias, WeightPrecision.Integer8);
        PackedMatrix r0 = PackedMatrix.FromRowMajor(b, k, n, bias, WeightPrecision.Integer8);
        Assert.Equal(r0.Quads, t.Quads);
        Assert.Equal(r0.Scales, t.Scales);
        Assert.Equal(r0.ColumnSums, t.ColumnSums);
        Assert.Equal(r0.Bias, t.Bias);
        foreach (WeightPrecision precision in new[] { WeightPrecision.Binary32, WeightPrecision.BFloat16 })
        {
            PackedMatrix tf = PackedMatrix.FromTransposed(bt, k, n, bias, precision), rf = PackedMatrix.FromRowMajor(b, k, n, bias, precision);
            Assert.Equal(rf.Data, tf.Data);
            Assert.Equal(rf.Pairs, tf.Pairs);
            Assert.Equal(rf.Bias, tf.Bias);
        }
    }

    [Fact]
    public void Int8_transposed_pack_rounds_ties_to_even_as_the_row_major_pack()
    {
        // Columns whose largest magnitude is 127 have scale 1, so x · (1 / s) is x itself and the ties below stay ties:
        // round half to even (common practice) gives 2, −4, 0, −0, 2, … in both packs.
        int k = 11, n = 70;
        float[] ties = [127f, 2.5f, -3.5f, 0.5f, -0.5f, 1.5f, -126.5f, 126.5f, 4.5f, -2.5f, 0f];
        float[] bt = new float[n * k];
        for (int c = 0; c < n; c++)
        {
            for (int r = 0; r < k; r++)
            {
                bt[(c * k) + r] = ties[(r + c) % k] * (c % 2 == 0 ? 1 : -1);
            }
        }
        float[] b = new float[k * n];
        for (int r = 0; r < k; r++)
        {
            for (int c = 0; c < n; c++)
            {
                b[(r * n) + c] = bt[(c * k) + r];
            }
        }
        PackedMatrix t = PackedMatrix.FromTransposed(bt, k, n, precision: WeightPrecision.Integer8);
        PackedMatrix r0 = PackedMatrix.FromRowMajor(b, k, n, precision: WeightPrecision.Integer8);
        Assert.Equal(r0.Quads, t.Quads);
        Assert.Equal(r0.ColumnSums, t.ColumnSums);
        Assert.Contains((sbyte)2, t.Quads!);
        Assert.DoesNotContain((sbyte)3, t.Quads!);   // 2.5 → 2, never 3; −3.5 → −4
    }

    /// <summary>The sizes of <see cref="Matches_reference_on_small_and_ragged_sizes"/>: M, N in 0/1 … 257, K in 1 … 255.</summary>
    private static IEnumerable<(int M, int N, int K)> Grid() =>
        from m in Ms from n in Ns from k in Ks select (m, n, k);

    /// <summary>Symmetric 8-bit quantization of a row-major rows × cols matrix, per row or per column (scalar code).</summary>
    private static (float[] Values, float[] Scales) Quantize(float[] x, int rows, int cols, bool byRow)
    {
        int groups = byRow ? rows : cols, length = byRow ? cols : rows;
        float[] q = new float[x.Length], scales = new float[groups];
        for (int g = 0; g < groups; g++)
        {
            int At(int i) => byRow ? (g * cols) + i : (i * cols) + g;
            float max = 0;
            for (int i = 0; i < length; i++)
            {
                max = Math.Max(max, Math.Abs(x[At(i)]));
            }
            float scale = max > 0 ? max / 127f : 1f, inverse = 1f / scale;
            scales[g] = scale;
            for (int i = 0; i < length; i++)
            {
                q[At(i)] = Math.Clamp(MathF.Round(x[At(i)] * inverse, MidpointRounding.ToEven), -127, 127);
            }
        }
        return (q, scales);
    }

    /// <summary>x rounded to 8 significant bits (bfloat16's precision), ties to even, in float64 arithmetic.</summary>
    internal static float RoundToBFloat16(float x)
    {
        if (x == 0 || !float.IsFinite(x))
        {
            return x;
        }
        // bfloat16 shares float32's exponent range, subnormals included: the spacing is 2^(e − 7), at least 2^−133.
        int e = Math.Max(Math.ILogB((double)x), -126);
        double ulp = Math.ScaleB(1.0, e - 7);
        return (float)(Math.Round(x / ulp, MidpointRounding.ToEven) * ulp);
    }

    private static void Check(KernelVariant variant, int m, int n, int k, ref DeterministicRandom rng, bool bias, bool accumulate)
    {
        float[] a = Random(ref rng, m * k), b = Random(ref rng, k * n);
        float[]? bv = bias ? Random(ref rng, n) : null;
        float[] c = Random(ref rng, m * n);
        float[]? c0 = accumulate ? (float[])c.Clone() : null;
        double[] expected = ReferenceKernels.Gemm(a, b, bv, c0, m, k, n);
        K.Gemm(a, m, k, PackedMatrix.FromRowMajor(b, k, n, bv), c, n, accumulate, variant);
        for (int i = 0; i < expected.Length; i++)
        {
            // float32 accumulation over k terms of N(0,1)·N(0,1): error ~ √k·2⁻²⁴ per unit of magnitude; 1e-5·√k is ample.
            double tol = 1e-5 * Math.Sqrt(k) * Math.Max(1, Math.Abs(expected[i]));
            Assert.True(Math.Abs(c[i] - expected[i]) <= tol,
                $"{variant} m={m} n={n} k={k}: C[{i}] = {c[i]}, expected {expected[i]}");
        }
    }

    internal static float[] Random(ref DeterministicRandom rng, int count)
    {
        float[] v = new float[count];
        rng.FillNormal(v, 1.0);
        return v;
    }
}
