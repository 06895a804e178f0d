using System.Runtime.CompilerServices;
using System.Runtime.Intrinsics;

namespace Assay.Kernels;

internal static partial class CpuKernels
{
    /// <summary>Lanes of <see cref="LaneSum(ReadOnlySpan{float}, bool, KernelVariant)"/>.</summary>
    internal const int SumLanes = 16;

    /// <summary>Σ x, in the one order of <see cref="LaneSum(ReadOnlySpan{float}, bool, KernelVariant)"/>, on this process's widest path.</summary>
    public static float LaneSum(ReadOnlySpan<float> x) => LaneSum(x, squares: false, KernelSelector.Current);

    /// <summary>Σ x², in the one order of <see cref="LaneSum(ReadOnlySpan{float}, bool, KernelVariant)"/>, on this process's widest path.</summary>
    public static float LaneSumOfSquares(ReadOnlySpan<float> x) => LaneSum(x, squares: true, KernelSelector.Current);

    /// <summary>
    /// Σ x (or Σ x²) in float32 in one fixed order whatever the CPU and its vector width: element i goes to lane i mod 16
    /// (each lane adds its elements in order, squares rounded before they are added), then the lanes are added in
    /// halves — lane j takes lane j + 8, then j + 4, j + 2 and j + 1 — so a 512-bit vector, two 256-bit, four 128-bit
    /// or sixteen scalars give the same bits on x86-64 and Arm64 (library sums follow the machine's vector width).
    /// </summary>
    [MethodImpl(MethodImplOptions.AggressiveOptimization)]
    internal static float LaneSum(ReadOnlySpan<float> x, bool squares, KernelVariant variant)
    {
        Span<float> lanes = stackalloc float[SumLanes];
        int whole = x.Length / SumLanes * SumLanes, i = 0;
        switch (variant)
        {
            case KernelVariant.Vector512:
                {
                    Vector512<float> a = Vector512<float>.Zero;
                    for (; i < whole; i += SumLanes)
                    {
                        Vector512<float> v = Vector512.Create(x.Slice(i, 16));
                        a += squares ? v * v : v;
                    }
                    a.CopyTo(lanes);
                    break;
                }
            case KernelVariant.Vector256:
                {
                    Vector256<float> a0 = Vector256<float>.Zero, a1 = Vector256<float>.Zero;
                    for (; i < whole; i += SumLanes)
                    {
                        Vector256<float> v0 = Vector256.Create(x.Slice(i, 8)), v1 = Vector256.Create(x.Slice(i + 8, 8));
                        a0 += squares ? v0 * v0 : v0;
                        a1 += squares ? v1 * v1 : v1;
                    }
                    a0.CopyTo(lanes);
                    a1.CopyTo(lanes[8..]);
                    break;
                }
            case KernelVariant.Vector128:
                {
                    Vector128<float> a0 = Vector128<float>.Zero, a1 = Vector128<float>.Zero, a2 = Vector128<float>.Zero, a3 = Vector128<float>.Zero;
                    for (; i < whole; i += SumLanes)
                    {
                        Vector128<float> v0 = Vector128.Create(x.Slice(i, 4)), v1 = Vector128.Create(x.Slice(i + 4, 4));
                        Vector128<float> v2 = Vector128.Create(x.Slice(i + 8, 4)), v3 = Vector128.Create(x.Slice(i + 12, 4));
                        a0 += squares ? v0 * v0 : v0;
                        a1 += squares ? v1 * v1 : v1;
                        a2 += squares ? v2 * v2 : v2;
                        a3 += squares ? v3 * v3 : v3;
                    }
                    a0.CopyTo(lanes);
                    a1.CopyTo(lanes[4..]);
                    a2.CopyTo(lanes[8..]);
                    a3.CopyTo(lanes[12..]);
                    break;
                }
            default:
                lanes.Clear();
                break;
        }
        for (; i < x.Length; i++)
        {
            float v = x[i];
            lanes[i % SumLanes] += squares ? v * v : v;
        }
        for (int w = SumLanes / 2; w >= 1; w /= 2)
        {
            for (int j = 0; j < w; j++)
            {
                lanes[j] += lanes[j + w];
            }
        }
        return lanes[0];
    }
}
