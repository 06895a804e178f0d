using System.Runtime.CompilerServices;
using System.Runtime.Intrinsics;

namespace Assay.Kernels;

internal static partial class CpuKernels
{
    /// <summary>
    /// dst[l] += Σ_i s[i] · m[i·stride + l] for l &lt; dst.Length: one fused multiply-add chain per output over i in order,
    /// continuing from dst[l],
    /// the outputs side by side in vector lanes, widest first (512 → 256 → 128 bits, as far as <paramref name="variant"/>
    /// allows), the rest scalar. Every path runs the same chains, so all variants give the same bits.
    /// </summary>
    public static void WeightedSum(ReadOnlySpan<float> s, ReadOnlySpan<float> m, int stride, Span<float> dst, KernelVariant variant)
    {
        int l = 0;
        if (variant >= KernelVariant.Vector512)
        {
            l = WeightedSum<Lanes512>(s, m, stride, dst, l);
        }
        if (variant >= KernelVariant.Vector256)
        {
            l = WeightedSum<Lanes256>(s, m, stride, dst, l);
        }
        if (variant >= KernelVariant.Vector128)
        {
            l = WeightedSum<Lanes128>(s, m, stride, dst, l);
        }
        for (; l < dst.Length; l++)
        {
            float acc = dst[l];
            for (int i = 0; i < s.Length; i++)
            {
                acc = MathF.FusedMultiplyAdd(s[i], m[(i * stride) + l], acc);
            }
            dst[l] = acc;
        }
    }

    /// <summary>acc[l] = fma(a[l], b[l], acc[l]) for l &lt; acc.Length, a whole number of the variant's vectors.</summary>
    public static void MultiplyAddInPlace(ReadOnlySpan<float> a, ReadOnlySpan<float> b, Span<float> acc, KernelVariant variant)
    {
        switch (variant)
        {
            case KernelVariant.Vector512:
                MultiplyAddInPlace<Lanes512>(a, b, acc);
                break;
            case KernelVariant.Vector256:
                MultiplyAddInPlace<Lanes256>(a, b, acc);
                break;
            case KernelVariant.Vector128:
                MultiplyAddInPlace<Lanes128>(a, b, acc);
                break;
            default:
                for (int l = 0; l < acc.Length; l++)
                {
                    acc[l] = MathF.FusedMultiplyAdd(a[l], b[l], acc[l]);
                }
                break;
        }
    }

    private static int WeightedSum<TLanes>(ReadOnlySpan<float> s, ReadOnlySpan<float> m, int stride, Span<float> dst, int l)
        where TLanes : struct, ILanes
    {
        for (; l + TLanes.Count <= dst.Length; l += TLanes.Count)
        {
            TLanes.WeightedSum(s, m[l..], stride, dst[l..]);
        }
        return l;
    }

    private static void MultiplyAddInPlace<TLanes>(ReadOnlySpan<float> a, ReadOnlySpan<float> b, Span<float> acc)
        where TLanes : struct, ILanes
    {
        for (int l = 0; l < acc.Length; l += TLanes.Count)
        {
            TLanes.MultiplyAdd(a[l..], b[l..], acc[l..]);
        }
    }

    /// <summary>One vector width's lane operations, for the drivers above.</summary>
    private interface ILanes
    {
        /// <summary>floats per vector.</summary>
        static abstract int Count { get; }

        /// <summary>dst[l] += Σ_i s[i] · m[i·stride + l] for the first <see cref="Count"/> l, one chain continuing from dst[l].</summary>
        static abstract void WeightedSum(ReadOnlySpan<float> s, ReadOnlySpan<float> m, int stride, Span<float> dst);

        /// <summary>acc[l] = fma(a[l], b[l], acc[l]) for the first <see cref="Count"/> l.</summary>
        static abstract void MultiplyAdd(ReadOnlySpan<float> a, ReadOnlySpan<float> b, Span<float> acc);
    }

    private readonly struct Lanes512 : ILanes
    {
        public static int Count => Vector512<float>.Count;

        [MethodImpl(MethodImplOptions.AggressiveInlining)]
        public static void WeightedSum(ReadOnlySpan<float> s, ReadOnlySpan<float> m, int stride, Span<float> dst)
        {
            Vector512<float> acc = Vector512.Create((ReadOnlySpan<float>)dst);
            for (int i = 0; i < s.Length; i++)
            {
                acc = Vector512.FusedMultiplyAdd(Vector512.Create(s[i]), Vector512.Create(m.Slice(i * stride, Count)), acc);
            }
            acc.CopyTo(dst);
        }

        [MethodImpl(MethodImplOptions.AggressiveInlining)]
        public static void MultiplyAdd(ReadOnlySpan<float> a, ReadOnlySpan<float> b, Span<float> acc) =>
            Vector512.FusedMultiplyAdd(Vector512.Create(a), Vector512.Create(b), Vector512.Create(acc)).CopyTo(acc);
    }

    private readonly struct Lanes256 : ILanes
    {
        public static int Count => Vector256<float>.Count;

        [MethodImpl(MethodImplOptions.AggressiveInlining)]
        public static void WeightedSum(ReadOnlySpan<float> s, ReadOnlySpan<float> m, int stride, Span<float> dst)
        {
            Vector256<float> acc = Vector256.Create((ReadOnlySpan<float>)dst);
            for (int i = 0; i < s.Length; i++)
            {
                acc = Vector256.FusedMultiplyAdd(Vector256.Create(s[i]), Vector256.Create(m.Slice(i * stride, Count)), acc);
            }
            acc.CopyTo(dst);
        }

        [MethodImpl(MethodImplOptions.AggressiveInlining)]
        public static void MultiplyAdd(ReadOnlySpan<float> a, ReadOnlySpan<float> b, Span<float> acc) =>
            Vector256.FusedMultiplyAdd(Vector256.Create(a), Vector256.Create(b), Vector256.Create(acc)).CopyTo(acc);
    }

    private readonly struct Lanes128 : ILanes
    {
        public static int Count => Vector128<float>.Count;

        [MethodImpl(MethodImplOptions.AggressiveInlining)]
        public static void WeightedSum(ReadOnlySpan<float> s, ReadOnlySpan<float> m, int stride, Span<float> dst)
        {
            Vector128<float> acc = Vector128.Create((ReadOnlySpan<float>)dst);
            for (int i = 0; i < s.Length; i++)
            {
                acc = Vector128.FusedMultiplyAdd(Vector128.Create(s[i]), Vector128.Create(m.Slice(i * stride, Count)), acc);
            }
            acc.CopyTo(dst);
        }

        [MethodImpl(MethodImplOptions.AggressiveInlining)]
        public static void MultiplyAdd(ReadOnlySpan<float> a, ReadOnlySpan<float> b, Span<float> acc) =>
            Vector128.FusedMultiplyAdd(Vector128.Create(a), Vector128.Create(b), Vector128.Create(acc)).CopyTo(acc);
    }
}
