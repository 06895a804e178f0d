using System.Numerics.Tensors;

namespace Assay.Kernels;

internal static unsafe partial class CpuKernels
{
    /// <summary>
    /// Causal scaled dot-product attention of one key/value head and the query heads it serves, over one sequence,
    /// for the query blocks <paramref name="firstBlock"/> … <paramref name="endBlock"/> − 1 of
    /// <see cref="AttentionScratch.BlockPositions"/> positions each.
    /// <paramref name="qkv"/> holds the sequence's rows, each [q | k | v]: <c>heads</c> query heads then
    /// <c>kvHeads</c> key heads then <c>kvHeads</c> value heads, each <c>headWidth</c> wide. Query head h reads key/value
    /// head h / (heads / kvHeads); this call runs the query heads of key/value head <paramref name="kvHead"/> and writes
    /// each to columns h·hd … h·hd+hd−1 of the (heads·hd)-wide rows of <paramref name="output"/>. For each position t:
    /// out_t = Σ_{s} softmax_s(q_t·k_s / √hd) · v_s over s ≤ t, and s &gt; t − window when the shape's window is positive.
    /// <para>
    /// Blocked: the keys and values the blocks read are packed once as GEMM panels; a block's query rows (its positions ×
    /// the group's heads, which share the key/value tiles) get their scores from the GEMM micro-tiles over the key panels
    /// up to the block's last position (panels past it are never touched), one softmax per row over exactly the keys it
    /// sees, and their outputs from micro-tiles over the positions every row of the micro-tile sees; the few positions
    /// only some of its rows see (the causal diagonal, a window's edge) are added row by row. Every score is one fused multiply-add
    /// chain over the head's columns in order and every output element one chain over the positions in order, whatever
    /// the blocking, the split into calls or the variant, so all give the same bits (those of a plain loop per row).
    /// </para>
    /// </summary>
    public static void CausalAttentionGroup(ReadOnlySpan<float> qkv, Span<float> output, int length, AttentionShape shape,
        int kvHead, int firstBlock, int endBlock, AttentionScratch scratch, KernelVariant variant)
    {
        const int W = PackedMatrix.PanelWidth;
        int hd = shape.HeadWidth, stride = shape.RowWidth, outWidth = shape.Heads * hd, window = shape.Window;
        int group = shape.Heads / shape.KeyValueHeads;
        int bq = scratch.BlockPositions;
        int start = firstBlock * bq, end = Math.Min(length, endBlock * bq);
        if (start >= end)
        {
            return;
        }
        if (!scratch.Fits(shape, length))
        {
            throw new ArgumentException($"attention scratch for {scratch.Shape} up to {scratch.Capacity} positions cannot run {shape} over {length}", nameof(scratch));
        }
        int kOffset = (shape.Heads + kvHead) * hd;
        int vOffset = (shape.Heads + shape.KeyValueHeads + kvHead) * hd;
        int vPanels = scratch.ValuePanels, ldo = vPanels * W, capacity = scratch.Capacity;
        float scale = 1f / MathF.Sqrt(hd);
        float[] keys = scratch.Keys, values = scratch.Values, queries = scratch.Queries, scores = scratch.Scores, outs = scratch.Output;

        // Pack the keys and values the range reads: key j at column j % 64 of panel j / 64 (k rows of 64 keys),
        // value j as row j of each 64-column value panel.
        for (int j = First(start, window); j < end; j++)
        {
            ReadOnlySpan<float> k = qkv.Slice((j * stride) + kOffset, hd);
            long kBase = ((long)(j / W) * hd * W) + (j % W);
            for (int c = 0; c < hd; c++)
            {
                keys[kBase + ((long)c * W)] = k[c];
            }
            ReadOnlySpan<float> v = qkv.Slice((j * stride) + vOffset, hd);
            for (int p = 0; p < vPanels; p++)
            {
                int width = Math.Min(W, hd - (p * W));
                v.Slice(p * W, width).CopyTo(values.AsSpan((int)((((long)p * capacity) + j) * W), width));
            }
        }

        int mr = MicroRows(variant);
        float** rows = stackalloc float*[6];
        fixed (float* pk = keys, pv = values, pq = queries, ps = scores, po = outs)
        {
            for (int t0 = start; t0 < end; t0 += bq)
            {
                int t1 = Math.Min(end, t0 + bq);
                int real = (t1 - t0) * group;
                int padded = (real + mr - 1) / mr * mr;
                int panel0 = First(t0, window) / W, panelEnd = ((t1 - 1) / W) + 1;
                int jlo = panel0 * W, lds = (panelEnd - panel0) * W;

                // Query rows: position-major, the group's heads side by side; padding rows are zero and dropped.
                for (int r = 0; r < real; r++)
                {
                    int t = t0 + (r / group), head = (kvHead * group) + (r % group);
                    qkv.Slice((t * stride) + (head * hd), hd).CopyTo(queries.AsSpan(r * hd, hd));
                }
                queries.AsSpan(real * hd, (padded - real) * hd).Clear();

                // Scores of each micro-tile of rows over the key panels its positions see (one key panel stays hot
                // while the rows pass it; panels past a tile's last position are never touched).
                for (int p = panel0; p < panelEnd; p++)
                {
                    byte* panel = (byte*)(pk + ((long)p * hd * W));
                    for (int r0 = 0; r0 < real; r0 += mr)
                    {
                        (int tFirst, int tLast) = TilePositions(t0, r0, mr, real, group);
                        if (p * W > tLast || (p + 1) * W <= First(tFirst, window))
                        {
                            continue;
                        }
                        for (int i = 0; i < mr; i++)
                        {
                            rows[i] = pq + ((r0 + i) * hd);
                        }
                        MicroTile<Float32Panel>(variant, rows, panel, hd, null, ps + ((long)r0 * lds) + ((p - panel0) * W), lds, accumulate: false);
                    }
                }

                // Each row's softmax over exactly the keys it sees.
                for (int r = 0; r < real; r++)
                {
                    int t = t0 + (r / group), f = First(t, window);
                    Span<float> s = scores.AsSpan((r * lds) + (f - jlo), t - f + 1);
                    TensorPrimitives.Multiply(s, scale, s);
                    SoftmaxInPlace(s);
                }

                // Outputs, a micro-tile of rows at a time: positions [shared0, shared1] are seen by every row of the
                // tile; a row's earlier positions (a window's edge) go before them and its later ones (the diagonal,
                // fewer than the tile's rows) after, so each chain stays in order.
                outs.AsSpan(0, padded * ldo).Clear();
                for (int r0 = 0; r0 < real; r0 += mr)
                {
                    (int tFirst, int tLast) = TilePositions(t0, r0, mr, real, group);
                    int shared0 = First(tLast, window), shared1 = tFirst;
                    bool shared = shared0 <= shared1;
                    int rEnd = Math.Min(real, r0 + mr);
                    for (int r = r0; r < rEnd; r++)
                    {
                        int t = t0 + (r / group), f = First(t, window);
                        AddValues(scores, (r * lds) + (f - jlo), f, (shared ? shared0 - 1 : t) - f + 1, values, capacity, outs, r * ldo, hd, variant);
                    }
                    if (!shared)
                    {
                        continue;
                    }
                    for (int i = 0; i < mr; i++)
                    {
                        rows[i] = ps + ((long)(r0 + i) * lds) + (shared0 - jlo);
                    }
                    for (int p = 0; p < vPanels; p++)
                    {
                        byte* panel = (byte*)(pv + ((((long)p * capacity) + shared0) * W));
                        MicroTile<Float32Panel>(variant, rows, panel, shared1 - shared0 + 1, null, po + (r0 * ldo) + (p * W), ldo, accumulate: true);
                    }
                    for (int r = r0; r < rEnd; r++)
                    {
                        int t = t0 + (r / group);
                        AddValues(scores, (r * lds) + (shared1 + 1 - jlo), shared1 + 1, t - shared1, values, capacity, outs, r * ldo, hd, variant);
                    }
                }

                for (int r = 0; r < real; r++)
                {
                    int t = t0 + (r / group), head = (kvHead * group) + (r % group);
                    outs.AsSpan(r * ldo, hd).CopyTo(output.Slice((t * outWidth) + (head * hd), hd));
                }
            }
        }
    }

    /// <summary>The positions of the first and last real row of the micro-tile of rows from <paramref name="r0"/>.</summary>
    private static (int First, int Last) TilePositions(int t0, int r0, int mr, int real, int group) =>
        (t0 + (r0 / group), t0 + ((Math.Min(real, r0 + mr) - 1) / group));

    /// <summary>The first position query position <paramref name="t"/> sees.</summary>
    private static int First(int t, int window) => window > 0 ? Math.Max(0, t - window + 1) : 0;

    /// <summary>
    /// Continues one query row's output chains over <paramref name="count"/> positions from <paramref name="from"/>:
    /// out[c] = fma(p_j, v_j[c], out[c]) for j in order, one value panel at a time.
    /// </summary>
    private static void AddValues(float[] scores, int scoreAt, int from, int count, float[] values, int capacity,
        float[] outs, int outAt, int hd, KernelVariant variant)
    {
        const int W = PackedMatrix.PanelWidth;
        if (count <= 0)
        {
            return;
        }
        ReadOnlySpan<float> s = scores.AsSpan(scoreAt, count);
        for (int p = 0; p * W < hd; p++)
        {
            int width = Math.Min(W, hd - (p * W));
            WeightedSum(s, values.AsSpan((int)((((long)p * capacity) + from) * W)), W, outs.AsSpan(outAt + (p * W), width), variant);
        }
    }
}
