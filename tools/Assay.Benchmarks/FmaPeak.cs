using System.Diagnostics;
using System.Runtime.Intrinsics;

namespace Assay.Benchmarks;

/// <summary>
/// This CPU's float32 FMA peak, measured: ten independent accumulator chains per thread (enough to keep two FMA pipes
/// busy at a latency of up to five cycles), registers only, no memory traffic, in the widest vector the hardware
/// accelerates. A Vector512 loop on a CPU without AVX-512 runs in software halves and measured 55-80 GFLOP/s where
/// the Vector256 loop gave 91-111 (AMD EPYC family 25 model 1, 2 threads), so the width is chosen, never assumed.
/// Shared with the libtorch comparison (linked source).
/// </summary>
internal static class FmaPeak
{
    /// <summary>The vector the peak loop runs in: the widest one the hardware accelerates.</summary>
    public static string Width => Vector512.IsHardwareAccelerated ? "Vector512" : Vector256.IsHardwareAccelerated ? "Vector256" : "Vector128";

    /// <summary>GFLOP/s (2 per lane per FMA), median of 3.</summary>
    public static double Measure(int threads)
    {
        const int iterations = 20_000_000;
        (Func<int, float> chains, int lanes) = Vector512.IsHardwareAccelerated ? (Chains512, Vector512<float>.Count)
            : Vector256.IsHardwareAccelerated ? (Chains256, Vector256<float>.Count) : ((Func<int, float>)Chains128, Vector128<float>.Count);
        double seconds = Median(3, () => Parallel.For(0, threads, new ParallelOptions { MaxDegreeOfParallelism = threads }, _ => chains(iterations)));
        return 2.0 * lanes * Chains * (double)iterations * threads / seconds / 1e9;
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

    private const int Chains = 10;

    private static float Chains512(int iterations)
    {
        Vector512<float> a0 = Vector512.Create(1f), a1 = a0, a2 = a0, a3 = a0, a4 = a0, a5 = a0, a6 = a0, a7 = a0, a8 = a0, a9 = a0;
        Vector512<float> m = Vector512.Create(0.999999f), c = Vector512.Create(1e-7f);
        for (int i = 0; i < iterations; i++)
        {
            a0 = Vector512.FusedMultiplyAdd(a0, m, c); a1 = Vector512.FusedMultiplyAdd(a1, m, c);
            a2 = Vector512.FusedMultiplyAdd(a2, m, c); a3 = Vector512.FusedMultiplyAdd(a3, m, c);
            a4 = Vector512.FusedMultiplyAdd(a4, m, c); a5 = Vector512.FusedMultiplyAdd(a5, m, c);
            a6 = Vector512.FusedMultiplyAdd(a6, m, c); a7 = Vector512.FusedMultiplyAdd(a7, m, c);
            a8 = Vector512.FusedMultiplyAdd(a8, m, c); a9 = Vector512.FusedMultiplyAdd(a9, m, c);
        }
        return Vector512.Sum(a0 + a1 + a2 + a3 + a4 + a5 + a6 + a7 + a8 + a9);
    }

    private static float Chains256(int iterations)
    {
        Vector256<float> a0 = Vector256.Create(1f), a1 = a0, a2 = a0, a3 = a0, a4 = a0, a5 = a0, a6 = a0, a7 = a0, a8 = a0, a9 = a0;
        Vector256<float> m = Vector256.Create(0.999999f), c = Vector256.Create(1e-7f);
        for (int i = 0; i < iterations; i++)
        {
            a0 = Vector256.FusedMultiplyAdd(a0, m, c); a1 = Vector256.FusedMultiplyAdd(a1, m, c);
            a2 = Vector256.FusedMultiplyAdd(a2, m, c); a3 = Vector256.FusedMultiplyAdd(a3, m, c);
            a4 = Vector256.FusedMultiplyAdd(a4, m, c); a5 = Vector256.FusedMultiplyAdd(a5, m, c);
            a6 = Vector256.FusedMultiplyAdd(a6, m, c); a7 = Vector256.FusedMultiplyAdd(a7, m, c);
            a8 = Vector256.FusedMultiplyAdd(a8, m, c); a9 = Vector256.FusedMultiplyAdd(a9, m, c);
        }
        return Vector256.Sum(a0 + a1 + a2 + a3 + a4 + a5 + a6 + a7 + a8 + a9);
    }

    private static float Chains128(int iterations)
    {
        Vector128<float> a0 = Vector128.Create(1f), a1 = a0, a2 = a0, a3 = a0, a4 = a0, a5 = a0, a6 = a0, a7 = a0, a8 = a0, a9 = a0;
        Vector128<float> m = Vector128.Create(0.999999f), c = Vector128.Create(1e-7f);
        for (int i = 0; i < iterations; i++)
        {
            a0 = Vector128.FusedMultiplyAdd(a0, m, c); a1 = Vector128.FusedMultiplyAdd(a1, m, c);
            a2 = Vector128.FusedMultiplyAdd(a2, m, c); a3 = Vector128.FusedMultiplyAdd(a3, m, c);
            a4 = Vector128.FusedMultiplyAdd(a4, m, c); a5 = Vector128.FusedMultiplyAdd(a5, m, c);
            a6 = Vector128.FusedMultiplyAdd(a6, m, c); a7 = Vector128.FusedMultiplyAdd(a7, m, c);
            a8 = Vector128.FusedMultiplyAdd(a8, m, c); a9 = Vector128.FusedMultiplyAdd(a9, m, c);
        }
        return Vector128.Sum(a0 + a1 + a2 + a3 + a4 + a5 + a6 + a7 + a8 + a9);
    }
}
