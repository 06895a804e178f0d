using System.Globalization;
using Assay.Fixtures;
using Assay.Kernels;
using Assay.Model;
using Assay.Weights;

namespace Assay.Benchmarks;

/// <summary>
/// The engine's packed GEMM at transformer shapes (GPT-2 small's projections for 256 and 1,024 tokens), on every kernel
/// variant this CPU runs, with float32 and bfloat16 panels, and int8 panels on every integer path this CPU runs (under
/// the widest float variant), against the FMA peak measured in the same run; each int8 row ends with its rate against
/// float32 on the same shape and variant. Medians of the repeats. The scalar paths run once per shape, float32 and int8
/// only (they are references, not contenders).
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
        o.WriteLine(string.Create(inv, $"FMA peak (register-only {FmaPeak.Width} loop, {threads} threads): {peak:F1} GFLOP/s; GEMM medians of {repeats}."));
        o.WriteLine();
        o.WriteLine(Machine.Describe() + " (the defaults; each row names the path it ran).");
        o.WriteLine();
        o.WriteLine("| M × K · K × N | shape | weights | variant | int8 path | GFLOP/s | of the FMA peak | × float32 |");
        o.WriteLine("|---|---|---|---|---|---:|---:|---:|");
        KernelVariant widest = KernelSelector.Select(null).Float;
        var rng = new DeterministicRandom(11);
        WarmUp(parallel);
        foreach ((int m, int k, int n, string what) in shapes)
        {
            float[] a = new float[m * k], b = new float[k * n], bias = new float[n], c = new float[m * n];
            rng.FillNormal(a, 1);
            rng.FillNormal(b, 0.05);
            double float32 = double.NaN;
            foreach (WeightPrecision precision in Enum.GetValues<WeightPrecision>())
            {
                PackedMatrix packed = PackedMatrix.FromRowMajor(b, k, n, bias, precision);
                var runs = precision == WeightPrecision.Integer8
                    ? Enum.GetValues<Int8Kernel>().Where(KernelSelector.IsSupported).Select(q => (widest, (Int8Kernel?)q))
                    : new[] { KernelVariant.Vector512, KernelVariant.Vector256, KernelVariant.Vector128, KernelVariant.Scalar }
                        .Where(v => KernelSelector.IsSupported(v) && (v != KernelVariant.Scalar || precision == WeightPrecision.Binary32))
                        .Select(v => (v, (Int8Kernel?)null));
                foreach ((KernelVariant v, Int8Kernel? q) in runs)
                {
                    bool reference = v == KernelVariant.Scalar || q == Int8Kernel.Scalar;
                    double seconds = FmaPeak.Median(reference ? 1 : repeats, () => CpuKernels.Gemm(a, m, k, packed, c, n, false, v, parallel, int8: q));
                    double gflops = 2.0 * m * k * n / seconds / 1e9;
                    if (precision == WeightPrecision.Binary32 && v == widest)
                    {
                        float32 = gflops;
                    }
                    string weights = precision switch
                    {
                        WeightPrecision.BFloat16 => "bfloat16",
                        WeightPrecision.Integer8 => "int8",
                        _ => "float32",
                    };
                    string ratio = q is null ? "" : string.Create(inv, $"{gflops / float32:F2}×");
                    o.WriteLine(string.Create(inv, $"| {m} × {k} · {k} × {n} | {what} | {weights} | {v} | {q?.ToString() ?? "–"} | {gflops:F1} | {gflops / peak:P0} | {ratio} |"));
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
                foreach (Int8Kernel q in Enum.GetValues<Int8Kernel>().Where(KernelSelector.IsSupported))
                {
                    for (int i = 0; i < (precision == WeightPrecision.Integer8 ? 200 : 200 / 4); i++)
                    {
                        CpuKernels.Gemm(a, m, k, b, c, n, i % 2 == 0, v, parallel, int8: q);
                    }
                }
            }
        }
        Thread.Sleep(500);
    }
}
