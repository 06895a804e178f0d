namespace Assay.Kernels;

internal static partial class CpuKernels
{
    /// <summary>
    /// Causal scaled dot-product attention of one head over one sequence. <paramref name="qkv"/> holds the sequence's
    /// rows, each [q | k | v] of width 3·d with head h at columns h·hd … h·hd+hd−1 of each third; the head's output goes
    /// to columns h·hd … of the d-wide rows of <paramref name="output"/>. For each position t:
    /// out_t = Σ_{s ≤ t} softmax_s(q_t·k_s / √hd) · v_s. <paramref name="scores"/> is scratch of at least the sequence
    /// length, <paramref name="keys"/> of at least hd × length (the head's keys, transposed).
    /// Every score is one fused multiply-add chain over the head's columns in order, and every output element one chain
    /// over the positions in order (<see cref="WeightedSum"/>: keys side by side in lanes for the scores, columns side by
    /// side for the output), so all variants give the same bits.
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
            WeightedSum(q, keys, length, s, variant);
            for (int j = 0; j <= t; j++)
            {
                s[j] *= scale;
            }
            SoftmaxInPlace(s);
            WeightedSum(s, qkv[vOffset..], stride, output.Slice((t * width) + qOffset, headWidth), variant);
        }
    }
}
