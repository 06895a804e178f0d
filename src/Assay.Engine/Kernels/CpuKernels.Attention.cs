namespace Assay.Kernels;

internal static partial class CpuKernels
{
    /// <summary>
    /// Causal scaled dot-product attention of one key/value head and the query heads it serves, over one sequence.
    /// <paramref name="qkv"/> holds the sequence's rows, each [q | k | v]: <c>heads</c> query heads then
    /// <c>kvHeads</c> key heads then <c>kvHeads</c> value heads, each <c>headWidth</c> wide. Query head h reads key/value
    /// head h / (heads / kvHeads); this call runs the query heads of key/value head <paramref name="kvHead"/> and writes
    /// each to columns h·hd … h·hd+hd−1 of the (heads·hd)-wide rows of <paramref name="output"/>. For each position t:
    /// out_t = Σ_{s} softmax_s(q_t·k_s / √hd) · v_s over s ≤ t, and s &gt; t − window when the shape's window is positive.
    /// <paramref name="scores"/> is scratch of at least the sequence length, <paramref name="keys"/> of at least
    /// hd × length (the head's keys, transposed once for the whole group).
    /// Every score is one fused multiply-add chain over the head's columns in order, and every output element one chain
    /// over the positions in order (<see cref="WeightedSum"/>: keys side by side in lanes for the scores, columns side by
    /// side for the output), so all variants give the same bits.
    /// </summary>
    public static void CausalAttentionGroup(ReadOnlySpan<float> qkv, Span<float> output, int length, AttentionShape shape,
        int kvHead, Span<float> scores, Span<float> keys, KernelVariant variant)
    {
        int hd = shape.HeadWidth, stride = shape.RowWidth, outWidth = shape.Heads * hd;
        int group = shape.Heads / shape.KeyValueHeads;
        int kOffset = (shape.Heads + kvHead) * hd;
        int vOffset = (shape.Heads + shape.KeyValueHeads + kvHead) * hd;
        float scale = 1f / MathF.Sqrt(hd);
        // keys[p, j] = k_j[p]: the scores of 16 (or 8) keys are then one vector FMA per head column.
        for (int j = 0; j < length; j++)
        {
            ReadOnlySpan<float> k = qkv.Slice((j * stride) + kOffset, hd);
            for (int p = 0; p < hd; p++)
            {
                keys[(p * length) + j] = k[p];
            }
        }
        for (int head = kvHead * group; head < (kvHead + 1) * group; head++)
        {
            int qOffset = head * hd;
            for (int t = 0; t < length; t++)
            {
                int first = shape.Window > 0 ? Math.Max(0, t - shape.Window + 1) : 0;
                ReadOnlySpan<float> q = qkv.Slice((t * stride) + qOffset, hd);
                Span<float> s = scores[..(t - first + 1)];
                WeightedSum(q, keys[first..], length, s, variant);
                for (int j = 0; j < s.Length; j++)
                {
                    s[j] *= scale;
                }
                SoftmaxInPlace(s);
                WeightedSum(s, qkv[((first * stride) + vOffset)..], stride, output.Slice((t * outWidth) + qOffset, hd), variant);
            }
        }
    }
}
