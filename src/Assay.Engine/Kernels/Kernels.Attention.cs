using System.Runtime.CompilerServices;
using System.Runtime.Intrinsics;

namespace Assay.Kernels;

internal static partial class Kernels
{
    /// <summary>
    /// Causal scaled dot-product attention of one head over one sequence. <paramref name="qkv"/> holds the sequence's
    /// rows, each [q | k | v] of width 3·d with head h at columns h·hd … h·hd+hd−1 of each third; the head's output goes
    /// to columns h·hd … of the d-wide rows of <paramref name="output"/>. For each position t:
    /// out_t = Σ_{s ≤ t} softmax_s(q_t·k_s / √hd) · v_s. <paramref name="scores"/> is scratch of at least the sequence
    /// length, <paramref name="keys"/> of at least hd × length (the head's keys, transposed).
    /// Every score is one fused multiply-add chain over the head's columns in order, and every output element one chain
    /// over the positions in order; the vector paths run those chains in lanes (keys side by side for the scores,
    /// columns side by side for the output), so all variants give the same bits.
    /// </summary>
    public static void CausalAttentionHead(ReadOnlySpan<float> qkv, Span<float> output, int length, int width,
        int head, int headWidth, Span<float> scores, Span<float> keys, KernelVariant variant)
    {
        int stride = 3 * width;
        int qOffset = head * headWidth;
        int kOffset = width + qOffset;
        int vOffset = (2 * width) + qOffset;
        float scale = 1f / MathF.Sqrt(headWidth);
        // keys[p, j] = k_j[p]: the scores of 16 (or 8) keys are then one vector FMA per head column.
        for (int j = 0; j < length; j++)
        {
            ReadOnlySpan<float> k = qkv.Slice((j * stride) + kOffset, headWidth);
            for (int p = 0; p < headWidth; p++)
            {
                keys[(p * length) + j] = k[p];
            }
        }
        for (int t = 0; t < length; t++)
        {
            ReadOnlySpan<float> q = qkv.Slice((t * stride) + qOffset, headWidth);
            Span<float> s = scores[..(t + 1)];
            Scores(q, keys, length, s, variant);
            for (int j = 0; j <= t; j++)
            {
                s[j] *= scale;
            }
            SoftmaxInPlace(s);
            Weighted(qkv[vOffset..], stride, s, output.Slice((t * width) + qOffset, headWidth), variant);
        }
    }

    /// <summary>s_j = Σ_p q_p · keys[p, j] for j &lt; s.Length, each an in-order FMA chain over p.</summary>
    private static void Scores(ReadOnlySpan<float> q, ReadOnlySpan<float> keys, int length, Span<float> s, KernelVariant variant)
    {
        int n = s.Length, j = 0;
        if (variant == KernelVariant.Vector512)
        {
            for (; j + 16 <= n; j += 16)
            {
                Vector512<float> acc = Vector512<float>.Zero;
                for (int p = 0; p < q.Length; p++)
                {
                    acc = Vector512.FusedMultiplyAdd(Vector512.Create(q[p]), Vector512.Create(keys.Slice((p * length) + j, 16)), acc);
                }
                acc.CopyTo(s[j..]);
            }
        }
        if (variant != KernelVariant.Scalar)
        {
            for (; j + 8 <= n; j += 8)
            {
                Vector256<float> acc = Vector256<float>.Zero;
                for (int p = 0; p < q.Length; p++)
                {
                    acc = Vector256.FusedMultiplyAdd(Vector256.Create(q[p]), Vector256.Create(keys.Slice((p * length) + j, 8)), acc);
                }
                acc.CopyTo(s[j..]);
            }
        }
        for (; j < n; j++)
        {
            float acc = 0f;
            for (int p = 0; p < q.Length; p++)
            {
                acc = MathF.FusedMultiplyAdd(q[p], keys[(p * length) + j], acc);
            }
            s[j] = acc;
        }
    }

    /// <summary>o_p = Σ_j w_j · v_j[p] over the weights in order, v_j the head's values at row j (row stride given).</summary>
    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    private static void Weighted(ReadOnlySpan<float> values, int stride, ReadOnlySpan<float> w, Span<float> o, KernelVariant variant)
    {
        int hd = o.Length, p = 0;
        if (variant == KernelVariant.Vector512)
        {
            for (; p + 16 <= hd; p += 16)
            {
                Vector512<float> acc = Vector512<float>.Zero;
                for (int j = 0; j < w.Length; j++)
                {
                    acc = Vector512.FusedMultiplyAdd(Vector512.Create(w[j]), Vector512.Create(values.Slice((j * stride) + p, 16)), acc);
                }
                acc.CopyTo(o[p..]);
            }
        }
        if (variant != KernelVariant.Scalar)
        {
            for (; p + 8 <= hd; p += 8)
            {
                Vector256<float> acc = Vector256<float>.Zero;
                for (int j = 0; j < w.Length; j++)
                {
                    acc = Vector256.FusedMultiplyAdd(Vector256.Create(w[j]), Vector256.Create(values.Slice((j * stride) + p, 8)), acc);
                }
                acc.CopyTo(o[p..]);
            }
        }
        for (; p < hd; p++)
        {
            float acc = 0f;
            for (int j = 0; j < w.Length; j++)
            {
                acc = MathF.FusedMultiplyAdd(w[j], values[(j * stride) + p], acc);
            }
            o[p] = acc;
        }
    }
}
