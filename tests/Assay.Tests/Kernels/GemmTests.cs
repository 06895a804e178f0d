using Assay.Fixtures;
using Assay.Kernels;
using K = Assay.Kernels.Kernels;

namespace Assay.Tests.Kernels;

/// <summary>Every GEMM variant against the float64 reference, on sizes 0–257 and transformer shapes.</summary>
public sealed class GemmTests
{
    public static TheoryData<KernelVariant> Variants =>
        [.. Enum.GetValues<KernelVariant>().Where(KernelSelector.IsSupported)];

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
        // Row r of C must be bit-identical whether computed alone or among 300 rows (split over threads).
        var rng = new DeterministicRandom(9);
        int m = 300, k = 200, n = 150;
        float[] a = Random(ref rng, m * k), b = Random(ref rng, k * n), bias = Random(ref rng, n);
        PackedMatrix pb = PackedMatrix.FromRowMajor(b, k, n, bias);
        float[] all = new float[m * n];
        K.Gemm(a, m, k, pb, all, n, accumulate: false, variant);
        foreach (int r in new[] { 0, 5, 157, 299 })
        {
            float[] one = new float[n];
            K.Gemm(a.AsSpan(r * k, k), 1, k, pb, one, n, accumulate: false, variant);
            Assert.Equal(one, all.AsSpan(r * n, n).ToArray());
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
