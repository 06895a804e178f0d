using System.Globalization;
using Assay.Fixtures;
using Assay.Kernels;
using Assay.Model;
using Assay.Weights;

namespace Assay.Benchmarks;

/// <summary>
/// The engine's packed GEMM at transformer shapes (GPT-2 small's projections for 256 and 1,024 tokens), on every kernel
/// variant this CPU runs, with float32 and bfloat16 panels, against the FMA peak measured in the same run. Medians of the
/// repeats. The scalar path runs once per shape, float32 only (it is the reference, not a contender).
/// </summary>
internal static class GemmThroughput
{
    public static int Run(int repeats, int threads, TextWriter o)
    {
        CultureInfo inv = CultureInfo.InvariantCulture;
        (int M, int K, int N, string What)[] shapes =
        [
            (1024, 768, 2304, "qkv, 1,024 tokens"),
            (1024, 768, 768, "attention out"),
            (1024, 768, 3072, "MLP in"),
            (1024, 3072, 768, "MLP out"),
            (256, 768, 2304, "qkv, 256 tokens"),
            (256, 768, 768, "attention out, 256 tokens"),
        ];
        double peak = FmaPeak.Measure(threads);
        var parallel = new ParallelOptions { MaxDegreeOfParallelism = threads };
        o.WriteLine(string.Create(inv, $"FMA peak (register-only Vector512 loop, {threads} threads): {peak:F1} GFLOP/s; GEMM medians of {repeats}."));
        o.WriteLine();
        o.WriteLine("| M × K · K × N | shape | weights | variant | GFLOP/s | of the FMA peak |");
        o.WriteLine("|---|---|---|---|---:|---:|");
        var rng = new DeterministicRandom(11);
        WarmUp(parallel);
        foreach ((int m, int k, int n, string what) in shapes)
        {
            float[] a = new float[m * k], b = new float[k * n], bias = new float[n], c = new float[m * n];
            rng.FillNormal(a, 1);
            rng.FillNormal(b, 0.05);
            foreach (WeightPrecision precision in Enum.GetValues<WeightPrecision>())
            {
                PackedMatrix packed = PackedMatrix.FromRowMajor(b, k, n, bias, precision);
                foreach (KernelVariant v in new[] { KernelVariant.Vector512, KernelVariant.Vector256, KernelVariant.Vector128, KernelVariant.Scalar }.Where(KernelSelector.IsSupported))
                {
                    if (v == KernelVariant.Scalar && precision != WeightPrecision.Binary32)
                    {
                        continue;
                    }
                    double seconds = FmaPeak.Median(v == KernelVariant.Scalar ? 1 : repeats, () => CpuKernels.Gemm(a, m, k, packed, c, n, false, v, parallel));
                    double gflops = 2.0 * m * k * n / seconds / 1e9;
                    string weights = precision switch
                    {
                        WeightPrecision.BFloat16 => "bfloat16",
                        WeightPrecision.Integer8 => "int8",
                        _ => "float32",
                    };
                    o.WriteLine(string.Create(inv, $"| {m} × {k} · {k} × {n} | {what} | {weights} | {v} | {gflops:F1} | {gflops / peak:P0} |"));
                }
            }
        }
        return 0;
    }

    /// <summary>
    /// Enough calls of every variant on a small shape for the runtime's tiered JIT to finish optimizing the kernels
    /// (it promotes a method after 30 calls, compiling in the background), so the timed calls run the final code.
    /// </summary>
    private static void WarmUp(ParallelOptions parallel)
    {
        const int m = 64, k = 128, n = 256;
        float[] a = new float[m * k], c = new float[m * n];
        foreach (WeightPrecision precision in Enum.GetValues<WeightPrecision>())
        {
            PackedMatrix b = PackedMatrix.FromRowMajor(new float[k * n], k, n, new float[n], precision);
            foreach (KernelVariant v in Enum.GetValues<KernelVariant>().Where(KernelSelector.IsSupported))
            {
                for (int i = 0; i < 200; i++)
                {
                    CpuKernels.Gemm(a, m, k, b, c, n, i % 2 == 0, v, parallel);
                }
            }
        }
        Thread.Sleep(500);
    }
}
