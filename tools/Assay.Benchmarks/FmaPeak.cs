using System.Diagnostics;
using System.Runtime.Intrinsics;

namespace Assay.Benchmarks;

/// <summary>
/// This CPU's float32 FMA peak, measured: eight independent Vector512 accumulator chains per thread (enough to keep
/// both FMA pipes busy), registers only, no memory traffic. Shared with the libtorch comparison (linked source).
/// </summary>
internal static class FmaPeak
{
    /// <summary>GFLOP/s (2 per lane per FMA), median of 3.</summary>
    public static double Measure(int threads)
    {
        const int iterations = 20_000_000;
        double seconds = Median(3, () => Parallel.For(0, threads, new ParallelOptions { MaxDegreeOfParallelism = threads }, _ => Chains(iterations)));
        return 2.0 * Vector512<float>.Count * 8 * (double)iterations * threads / seconds / 1e9;
    }

    /// <summary>Median seconds of <paramref name="repeats"/> timed runs after one warm-up run.</summary>
    public static double Median(int repeats, Action run)
    {
        run();
        double[] times = new double[repeats];
        for (int i = 0; i < repeats; i++)
        {
            var clock = Stopwatch.StartNew();
            run();
            times[i] = clock.Elapsed.TotalSeconds;
        }
        Array.Sort(times);
        return times[repeats / 2];
    }

    private static float Chains(int iterations)
    {
        Vector512<float> a0 = Vector512.Create(1f), a1 = a0, a2 = a0, a3 = a0, a4 = a0, a5 = a0, a6 = a0, a7 = a0;
        Vector512<float> m = Vector512.Create(0.999999f), c = Vector512.Create(1e-7f);
        for (int i = 0; i < iterations; i++)
        {
            a0 = Vector512.FusedMultiplyAdd(a0, m, c);
            a1 = Vector512.FusedMultiplyAdd(a1, m, c);
            a2 = Vector512.FusedMultiplyAdd(a2, m, c);
            a3 = Vector512.FusedMultiplyAdd(a3, m, c);
            a4 = Vector512.FusedMultiplyAdd(a4, m, c);
            a5 = Vector512.FusedMultiplyAdd(a5, m, c);
            a6 = Vector512.FusedMultiplyAdd(a6, m, c);
            a7 = Vector512.FusedMultiplyAdd(a7, m, c);
        }
        return Vector512.Sum(a0 + a1 + a2 + a3 + a4 + a5 + a6 + a7);
    }
}
