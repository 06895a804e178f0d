using Assay.Fixtures;
using Assay.Kernels;
using Assay.Model;
using K = Assay.Kernels.CpuKernels;
using Assay.Weights;

namespace Assay.Tests.Kernels;

/// <summary>Φp = Σ_v p_v·E_v on the packed head, against a float64 sum, on every kernel path.</summary>
public sealed class ConditionalMeanTests
{
    [Theory]
    [MemberData(nameof(GemmTests.Variants), MemberType = typeof(GemmTests))]
    public void Matches_the_float64_sum_on_ragged_sizes(KernelVariant variant)
    {
        var rng = new DeterministicRandom(11);
        foreach ((int rows, int d, int v) in new[] { (0, 5, 7), (1, 1, 1), (3, 17, 63), (2, 48, 64), (5, 31, 65), (7, 64, 257), (2, 768, 50257) })
        {
            float[] e = GemmTests.Random(ref rng, v * d);            // E, V × d row-major (the token embedding)
            float[] p = new float[rows * v];
            for (int r = 0; r < rows; r++)
            {
                Span<float> row = p.AsSpan(r * v, v);
                rng.FillNormal(row, 1.0);
                for (int i = 0; i < v; i++)
                {
                    row[i] = MathF.Exp(row[i]);
                }
                float sum = 0;
                foreach (float x in row)
                {
                    sum += x;
                }
                for (int i = 0; i < v; i++)
                {
                    row[i] /= sum;
                }
            }
            foreach (WeightPrecision precision in new[] { WeightPrecision.Binary32, WeightPrecision.BFloat16 })
            {
                // In bfloat16 the reference sums over E rounded to bfloat16 (GemmTests.RoundToBFloat16).
                float[] stored = precision == WeightPrecision.BFloat16 ? [.. e.Select(GemmTests.RoundToBFloat16)] : e;
                Check(variant, precision, rows, d, v, p, stored, PackedMatrix.FromTransposed(e, d, v, precision: precision));
            }
        }
    }

    private static void Check(KernelVariant variant, WeightPrecision precision, int rows, int d, int v, float[] p, float[] e, PackedMatrix head)
    {
        float[] phi = new float[rows * d];
        K.ConditionalMean(p, rows, head, phi, variant);
        for (int r = 0; r < rows; r++)
        {
            for (int j = 0; j < d; j++)
            {
                double expected = 0, scale = 0;
                for (int i = 0; i < v; i++)
                {
                    expected += (double)p[(r * v) + i] * e[(i * d) + j];
                    scale += Math.Abs((double)p[(r * v) + i] * e[(i * d) + j]);
                }
                // A float32 sum of V terms: error ≤ ~V·2⁻²⁴·Σ|terms| in the worst case; 64 lanes make it far smaller.
                Assert.True(Math.Abs(phi[(r * d) + j] - expected) <= 1e-6 * scale + 1e-12,
                    $"{variant} {precision} rows={rows} d={d} V={v}: Φp[{r},{j}] = {phi[(r * d) + j]}, expected {expected}");
            }
        }
    }

    [Fact]
    public void Every_path_gives_the_same_bits()
    {
        var rng = new DeterministicRandom(12);
        int rows = 3, d = 40, v = 1000;
        float[] e = GemmTests.Random(ref rng, v * d), p = GemmTests.Random(ref rng, rows * v);
        foreach (WeightPrecision precision in new[] { WeightPrecision.Binary32, WeightPrecision.BFloat16 })
        {
            PackedMatrix head = PackedMatrix.FromTransposed(e, d, v, precision: precision);
            float[] scalar = new float[rows * d];
            K.ConditionalMean(p, rows, head, scalar, KernelVariant.Scalar);
            foreach (KernelVariant variant in Enum.GetValues<KernelVariant>().Where(KernelSelector.IsSupported))
            {
                float[] phi = new float[rows * d];
                K.ConditionalMean(p, rows, head, phi, variant, new ParallelOptions { MaxDegreeOfParallelism = 1 });
                Assert.Equal(scalar, phi);
            }
        }
    }
}
