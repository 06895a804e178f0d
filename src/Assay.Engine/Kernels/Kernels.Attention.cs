using System.Numerics.Tensors;

namespace Assay.Kernels;

internal static partial class Kernels
{
    /// <summary>
    /// Causal scaled dot-product attention of one head over one sequence. <paramref name="qkv"/> holds the sequence's
    /// rows, each [q | k | v] of width 3·d with head h at columns h·hd … h·hd+hd−1 of each third; the head's output goes
    /// to columns h·hd … of the d-wide rows of <paramref name="output"/>. For each position t:
    /// out_t = Σ_{s ≤ t} softmax_s(q_t·k_s / √hd) · v_s. <paramref name="scores"/> is scratch of at least the sequence length.
    /// </summary>
    public static void CausalAttentionHead(ReadOnlySpan<float> qkv, Span<float> output, int length, int width,
        int head, int headWidth, Span<float> scores)
    {
        int stride = 3 * width;
        int qOffset = head * headWidth;
        int kOffset = width + qOffset;
        int vOffset = (2 * width) + qOffset;
        float scale = 1f / MathF.Sqrt(headWidth);
        for (int t = 0; t < length; t++)
        {
            ReadOnlySpan<float> q = qkv.Slice((t * stride) + qOffset, headWidth);
            Span<float> s = scores[..(t + 1)];
            for (int j = 0; j <= t; j++)
            {
                s[j] = TensorPrimitives.Dot(q, qkv.Slice((j * stride) + kOffset, headWidth)) * scale;
            }
            SoftmaxInPlace(s);
            Span<float> o = output.Slice((t * width) + qOffset, headWidth);
            o.Clear();
            for (int j = 0; j <= t; j++)
            {
                TensorPrimitives.MultiplyAdd(qkv.Slice((j * stride) + vOffset, headWidth), s[j], o, o);
            }
        }
    }
}
