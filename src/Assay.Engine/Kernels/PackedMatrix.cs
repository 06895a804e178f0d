using System.Diagnostics;
using System.Numerics.Tensors;
using System.Runtime.CompilerServices;
using System.Runtime.Intrinsics;
using System.Runtime.Intrinsics.X86;
using Assay.Weights;

namespace Assay.Kernels;

/// <summary>
/// The right-hand matrix B (K × N) of <c>C = A·B + bias</c>, packed once at load into column panels of
/// <see cref="PanelWidth"/> columns: panel p holds, for k = 0 … K−1, the columns p·W … p·W+W−1 of row k, contiguous,
/// zero-padded past N. The GEMM micro-kernels stream a panel with unit stride. The bias, if any, is padded likewise
/// and stays float32.
/// <para>
/// In bfloat16 (<see cref="Pairs"/>) a panel row is 32 words of 32 bits: word j (j &lt; 16) holds column j in its
/// upper half and column j + 16 in its lower half, word 16 + j holds columns 32 + j and 48 + j. A kernel widens 16
/// columns with one AND (upper halves) or one shift left by 16 (lower halves): bf16 → fp32 is exact.
/// </para>
/// <para>
/// In int8 (<see cref="Quads"/>, row-major packs only) K is cut into groups of four (the last padded with zeros) and
/// group g of panel p is 64 × 4 bytes: column j's four values q[4g … 4g+3, j] side by side, the operand layout of a
/// 4-way byte dot product. Column n's real values are q·<see cref="Scales"/>[n]; <see cref="ColumnSums"/>[n] = Σ_k q[k, n].
/// </para>
/// </summary>
internal sealed class PackedMatrix
{
    /// <summary>Columns per panel: four 512-bit vectors of float32.</summary>
    public const int PanelWidth = 64;

    /// <summary>32-bit words per bfloat16 panel row.</summary>
    public const int PairWidth = PanelWidth / 2;

    /// <summary>Rows of K per int8 group.</summary>
    public const int QuadDepth = 4;

    private PackedMatrix(int rows, int columns, float[]? data, uint[]? pairs, float[]? bias)
    {
        Rows = rows;
        Columns = columns;
        Data = data;
        Pairs = pairs;
        Bias = bias;
    }

    private PackedMatrix(int rows, int columns, sbyte[] quads, float[] scales, int[] columnSums, float[]? bias)
    {
        Rows = rows;
        Columns = columns;
        Quads = quads;
        Scales = scales;
        ColumnSums = columnSums;
        Bias = bias;
    }

    /// <summary>How the panels are stored.</summary>
    public WeightPrecision Precision => Quads != null ? WeightPrecision.Integer8
        : Pairs != null ? WeightPrecision.BFloat16 : WeightPrecision.Binary32;

    /// <summary>Bytes the panels, scales and bias take.</summary>
    public long Bytes => ((Data?.LongLength ?? 0) * 4) + ((Pairs?.LongLength ?? 0) * 4) + (Quads?.LongLength ?? 0)
        + ((Scales?.LongLength ?? 0) * 4) + ((ColumnSums?.LongLength ?? 0) * 4) + ((Bias?.LongLength ?? 0) * 4);

    /// <summary>The <see cref="Bytes"/> a K × N pack in <paramref name="precision"/> takes, with or without a bias, before it is made.</summary>
    public static long BytesFor(int rows, int columns, WeightPrecision precision, bool bias)
    {
        long panels = (columns + PanelWidth - 1) / PanelWidth, padded = panels * PanelWidth;
        long biasBytes = bias ? 4 * padded : 0;
        return precision switch
        {
            WeightPrecision.BFloat16 => (panels * rows * PairWidth * 4) + biasBytes,
            WeightPrecision.Integer8 => (panels * ((rows + QuadDepth - 1) / QuadDepth) * PanelWidth * QuadDepth) + (4 * padded) + (4 * padded) + biasBytes,
            _ => (panels * rows * PanelWidth * 4) + biasBytes,
        };
    }

    /// <summary>Groups of <see cref="QuadDepth"/> rows of K, the last zero-padded.</summary>
    public int Groups => (Rows + QuadDepth - 1) / QuadDepth;

    /// <summary>The int8 panels (see the class remarks), pinned; null unless int8.</summary>
    public sbyte[]? Quads { get; }

    /// <summary>Per-column scales of the int8 panels, padded to whole panels with zeros; null unless int8.</summary>
    public float[]? Scales { get; }

    /// <summary>Per-column sums of the int8 values, padded with zeros; null unless int8.</summary>
    public int[]? ColumnSums { get; }

    /// <summary>K, the shared dimension.</summary>
    public int Rows { get; }

    /// <summary>N, the output width.</summary>
    public int Columns { get; }

    /// <summary>Number of column panels, ⌈N / W⌉.</summary>
    public int Panels => (Columns + PanelWidth - 1) / PanelWidth;

    /// <summary>The float32 panels, each K·W floats, pinned so kernels can hold pointers into them; null in bfloat16.</summary>
    public float[]? Data { get; }

    /// <summary>The bfloat16 panels, each K·W/2 words (see the class remarks), pinned; null in float32.</summary>
    public uint[]? Pairs { get; }

    /// <summary>The bias padded to Panels·W floats, or null.</summary>
    public float[]? Bias { get; }

    /// <summary>Packs a row-major K × N matrix (the [in, out] layout of GPT-2's projection layers).</summary>
    public static PackedMatrix FromRowMajor(ReadOnlySpan<float> b, int rows, int columns, ReadOnlySpan<float> bias = default,
        WeightPrecision precision = WeightPrecision.Binary32) =>
        precision == WeightPrecision.Integer8 ? PackQuads(b, rows, columns, bias) : Pack(b, rows, columns, bias, precision);

    /// <summary>Packs the transpose of a row-major N × K matrix (an [out, in] layout: the token embedding used as the
    /// output head, logits = h · Eᵀ, and the linear layers of the rotary families, y = x · Wᵀ + b).</summary>
    public static unsafe PackedMatrix FromTransposed(ReadOnlySpan<float> bt, int rows, int columns, ReadOnlySpan<float> bias = default,
        WeightPrecision precision = WeightPrecision.Binary32)
    {
        Check(bt, rows, columns, bias);
        fixed (float* pinned = bt)
        {
            float* source = pinned;
            return FromTransposedRows(rows, columns, (first, count) => new ReadOnlySpan<float>(source + ((long)first * rows), count * rows), bias, precision);
        }
    }

    /// <summary>
    /// Rows <paramref name="first"/> … <paramref name="first"/> + <paramref name="count"/> − 1 of an N × K row-major
    /// source (count·K floats), valid until the next call.
    /// </summary>
    internal delegate ReadOnlySpan<float> SourceRows(int first, int count);

    /// <summary>
    /// <see cref="FromTransposed"/> from a source read one panel (64 of its rows) at a time, so the source is never
    /// whole in memory: each panel's rows are gathered through a 16-row block into rows of k and written out as
    /// float32, rounded to bfloat16, or (int8) scaled per column by its largest magnitude and rounded.
    /// </summary>
    [MethodImpl(MethodImplOptions.AggressiveOptimization)]
    internal static unsafe PackedMatrix FromTransposedRows(int rows, int columns, SourceRows read, ReadOnlySpan<float> bias, WeightPrecision precision)
    {
        CheckShape(rows, columns, bias);
        const int Block = 16;
        int panels = (columns + PanelWidth - 1) / PanelWidth, groups = (rows + QuadDepth - 1) / QuadDepth;
        float[]? data = precision == WeightPrecision.Binary32 ? GC.AllocateArray<float>(checked(panels * rows * PanelWidth), pinned: true) : null;
        uint[]? pairs = precision == WeightPrecision.BFloat16 ? GC.AllocateArray<uint>(checked(panels * rows * PairWidth), pinned: true) : null;
        bool integer = precision == WeightPrecision.Integer8;
        sbyte[]? quads = integer ? GC.AllocateArray<sbyte>(checked(panels * groups * PanelWidth * QuadDepth), pinned: true) : null;
        float[]? scales = integer ? GC.AllocateArray<float>(panels * PanelWidth, pinned: true) : null;
        int[]? sums = integer ? GC.AllocateArray<int>(panels * PanelWidth, pinned: true) : null;
        Span<float> inverse = stackalloc float[PanelWidth];
        Span<float> block = stackalloc float[Block * PanelWidth];
        for (int p = 0; p < panels; p++)
        {
            int n0 = p * PanelWidth;
            int width = Math.Min(PanelWidth, columns - n0);
            ReadOnlySpan<float> chunk = read(n0, width);
            if (integer)
            {
                // Symmetric per column: s_n = max_k |B[k, n]| / 127 (1 for an all-zero column), q = round-to-even(B · (1 / s_n)).
                inverse.Clear();   // the padding columns' rows are zeros, quantized to 0
                for (int j = 0; j < width; j++)
                {
                    float max = MathF.Abs(TensorPrimitives.MaxMagnitude(chunk.Slice(j * rows, rows)));
                    scales![n0 + j] = max > 0 ? max / 127f : 1f;
                    inverse[j] = 1f / scales[n0 + j];
                }
            }
            block.Clear();
            fixed (float* from = chunk, to = block)
            {
                for (int k0 = 0; k0 < rows; k0 += Block)
                {
                    int depth = Math.Min(Block, rows - k0);
                    Gather(from, rows, k0, depth, width, to);
                    int quantized = quads is null ? 0 : QuantizeGroups(to, depth, inverse, quads, sums!, ((((long)p * groups) + (k0 / QuadDepth)) * PanelWidth * QuadDepth), n0);
                    for (int i = quantized; i < depth; i++)
                    {
                        Span<float> row = block.Slice(i * PanelWidth, PanelWidth);
                        int k = k0 + i;
                        if (data is not null)
                        {
                            row.CopyTo(data.AsSpan((p * rows * PanelWidth) + (k * PanelWidth), PanelWidth));
                        }
                        else if (pairs is not null)
                        {
                            ToBFloat16Row(row, pairs.AsSpan((p * rows * PairWidth) + (k * PairWidth), PairWidth));
                        }
                        else
                        {
                            long at = ((((long)p * groups) + (k / QuadDepth)) * PanelWidth * QuadDepth) + (k % QuadDepth);
                            for (int j = 0; j < width; j++)
                            {
                                int q = (int)Math.Clamp(MathF.Round(row[j] * inverse[j]), -127f, 127f);
                                quads![at + (j * QuadDepth)] = (sbyte)q;
                                sums![n0 + j] += q;
                            }
                        }
                    }
                }
            }
        }
        float[]? padded = PadBias(bias, panels);
        return integer ? new PackedMatrix(rows, columns, quads!, scales!, sums!, padded) : new PackedMatrix(rows, columns, data, pairs, padded);
    }

    /// <summary>Copies column n of B (K values; for a transposed pack, row n of the source) into destination.</summary>
    public void CopyColumn(int n, Span<float> destination)
    {
        Debug.Assert(Quads == null, "int8 packs are never read column by column");
        int panel = n / PanelWidth, j = n % PanelWidth;
        if (Data is { } data)
        {
            long baseIndex = ((long)panel * Rows * PanelWidth) + j;
            for (int k = 0; k < destination.Length; k++)
            {
                destination[k] = data[baseIndex + ((long)k * PanelWidth)];
            }
            return;
        }
        (int word, bool upper) = PairSlot(j);
        long pairBase = ((long)panel * Rows * PairWidth) + word;
        uint[] pairs = Pairs!;
        for (int k = 0; k < destination.Length; k++)
        {
            destination[k] = Widen(pairs[pairBase + ((long)k * PairWidth)], upper);
        }
    }

    /// <summary>Widens panel row k of panel p (64 values) to float32.</summary>
    public void CopyPanelRow(int panel, int k, Span<float> destination)
    {
        Debug.Assert(Quads == null, "int8 packs are never read row by row");
        if (Data is { } data)
        {
            data.AsSpan((int)(((long)panel * Rows * PanelWidth) + ((long)k * PanelWidth)), PanelWidth).CopyTo(destination);
            return;
        }
        ReadOnlySpan<uint> row = Pairs.AsSpan((int)(((long)panel * Rows * PairWidth) + ((long)k * PairWidth)), PairWidth);
        if (Vector512.IsHardwareAccelerated)
        {
            // Words 0–15 hold columns 0–15 (upper halves) and 16–31 (lower); words 16–31 the next 32 alike.
            Vector512<uint> mask = Vector512.Create(0xFFFF0000u);
            for (int half = 0; half < 2; half++)
            {
                Vector512<uint> w = Vector512.Create(row.Slice(16 * half, 16));
                (w & mask).AsSingle().CopyTo(destination[(32 * half)..]);
                Vector512.ShiftLeft(w, 16).AsSingle().CopyTo(destination[((32 * half) + 16)..]);
            }
            return;
        }
        for (int j = 0; j < PanelWidth; j++)
        {
            (int word, bool upper) = PairSlot(j);
            destination[j] = Widen(row[word], upper);
        }
    }

    /// <summary>bfloat16 of a float32, rounded to nearest, ties to even (NaN stays NaN).</summary>
    public static ushort ToBFloat16(float value)
    {
        uint bits = BitConverter.SingleToUInt32Bits(value);
        if (float.IsNaN(value))
        {
            return (ushort)((bits >> 16) | 0x40);
        }
        uint rounding = 0x7FFFu + ((bits >> 16) & 1u);
        return (ushort)((bits + rounding) >> 16);
    }

    /// <summary>The word and half that hold column j (0 … 63) of a bfloat16 panel row.</summary>
    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static (int Word, bool Upper) PairSlot(int j) => j switch
    {
        < 16 => (j, true),
        < 32 => (j - 16, false),
        < 48 => (j - 16, true),
        _ => (j - 32, false),
    };

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static float Widen(uint word, bool upper) =>
        BitConverter.UInt32BitsToSingle(upper ? word & 0xFFFF0000u : word << 16);

    [MethodImpl(MethodImplOptions.AggressiveOptimization)]
    private static PackedMatrix Pack(ReadOnlySpan<float> source, int rows, int columns, ReadOnlySpan<float> bias, WeightPrecision precision)
    {
        Check(source, rows, columns, bias);

        if (precision == WeightPrecision.BFloat16)
        {
            return PackPairs(source, rows, columns, bias);
        }

        int panels = (columns + PanelWidth - 1) / PanelWidth;
        float[] data = GC.AllocateArray<float>(checked(panels * rows * PanelWidth), pinned: true);
        for (int p = 0; p < panels; p++)
        {
            int n0 = p * PanelWidth;
            int width = Math.Min(PanelWidth, columns - n0);
            Span<float> panel = data.AsSpan(p * rows * PanelWidth, rows * PanelWidth);
            for (int k = 0; k < rows; k++)
            {
                source.Slice((k * columns) + n0, width).CopyTo(panel.Slice(k * PanelWidth, width));
            }
        }

        return new PackedMatrix(rows, columns, data, null, PadBias(bias, panels));
    }

    private static void Check(ReadOnlySpan<float> source, int rows, int columns, ReadOnlySpan<float> bias)
    {
        CheckShape(rows, columns, bias);
        if (source.Length != (long)rows * columns)
        {
            throw new ArgumentException($"source holds {source.Length} values; {rows} × {columns} needs {(long)rows * columns}", nameof(source));
        }
    }

    private static void CheckShape(int rows, int columns, ReadOnlySpan<float> bias)
    {
        ArgumentOutOfRangeException.ThrowIfNegativeOrZero(rows);
        ArgumentOutOfRangeException.ThrowIfNegativeOrZero(columns);
        if (!bias.IsEmpty && bias.Length != columns)
        {
            throw new ArgumentException($"bias holds {bias.Length} values; expected {columns}", nameof(bias));
        }
    }

    /// <summary>The bfloat16 panels of a row-major source, each row of a panel rounded by <see cref="ToBFloat16Row"/>.</summary>
    [MethodImpl(MethodImplOptions.AggressiveOptimization)]
    private static PackedMatrix PackPairs(ReadOnlySpan<float> source, int rows, int columns, ReadOnlySpan<float> bias)
    {
        int panels = (columns + PanelWidth - 1) / PanelWidth;
        uint[] pairs = GC.AllocateArray<uint>(checked(panels * rows * PairWidth), pinned: true);
        Span<float> row = stackalloc float[PanelWidth];
        for (int p = 0; p < panels; p++)
        {
            int n0 = p * PanelWidth;
            int width = Math.Min(PanelWidth, columns - n0);
            row.Clear();
            for (int k = 0; k < rows; k++)
            {
                source.Slice((k * columns) + n0, width).CopyTo(row);
                ToBFloat16Row(row, pairs.AsSpan((p * rows * PairWidth) + (k * PairWidth), PairWidth));
            }
        }

        return new PackedMatrix(rows, columns, null, pairs, PadBias(bias, panels));
    }

    /// <summary>
    /// The int8 form of the block's whole groups of four rows where 256-bit vectors are accelerated, eight columns at a
    /// time with the scalar loop's steps (multiply by 1 / s_n, round half to even, clamp to ±127), the four bytes of
    /// each column written as one word and the column sums added; returns the rows done (the rest go row by row).
    /// </summary>
    private static unsafe int QuantizeGroups(float* block, int depth, ReadOnlySpan<float> inverse, sbyte[] quads, int[] sums, long at, int n0)
    {
        if (!Vector256.IsHardwareAccelerated)
        {
            return 0;
        }
        int whole = depth / QuadDepth * QuadDepth;
        Vector256<float> low = Vector256.Create(-127f), high = Vector256.Create(127f);
        Vector256<int> bytes = Vector256.Create(0xFF);
        fixed (float* inv = inverse)
        fixed (sbyte* q = quads)
        fixed (int* sum = sums)
        {
            for (int i = 0; i < whole; i += QuadDepth)
            {
                sbyte* group = q + at + ((long)(i / QuadDepth) * PanelWidth * QuadDepth);
                for (int j = 0; j < PanelWidth; j += 8)
                {
                    Vector256<float> scale = Vector256.Load(inv + j);
                    float* row = block + (i * PanelWidth) + j;
                    Vector256<int> q0 = Vector256.ConvertToInt32(Vector256.Min(Vector256.Max(Vector256.Round(Vector256.Load(row) * scale), low), high));
                    Vector256<int> q1 = Vector256.ConvertToInt32(Vector256.Min(Vector256.Max(Vector256.Round(Vector256.Load(row + PanelWidth) * scale), low), high));
                    Vector256<int> q2 = Vector256.ConvertToInt32(Vector256.Min(Vector256.Max(Vector256.Round(Vector256.Load(row + (2 * PanelWidth)) * scale), low), high));
                    Vector256<int> q3 = Vector256.ConvertToInt32(Vector256.Min(Vector256.Max(Vector256.Round(Vector256.Load(row + (3 * PanelWidth)) * scale), low), high));
                    (Vector256.Load(sum + n0 + j) + q0 + q1 + q2 + q3).Store(sum + n0 + j);
                    ((q0 & bytes) | ((q1 & bytes) << 8) | ((q2 & bytes) << 16) | (q3 << 24)).Store((int*)(group + (j * QuadDepth)));
                }
            }
        }
        return whole;
    }

    /// <summary>
    /// to[i·64 + j] = from[j·rows + k0 + i] for i &lt; <paramref name="depth"/>, j &lt; <paramref name="width"/>: a block of a
    /// panel's source rows turned into rows of k, in 8 × 8 tiles transposed in registers where AVX is there (pure data
    /// movement, so the same values either way), the ragged rest one value at a time.
    /// </summary>
    private static unsafe void Gather(float* from, int rows, int k0, int depth, int width, float* to)
    {
        int tiledJ = 0, tiledI = 0;
        if (Avx.IsSupported)
        {
            tiledJ = width / 8 * 8;
            tiledI = depth / 8 * 8;
            for (int j0 = 0; j0 < tiledJ; j0 += 8)
            {
                for (int i0 = 0; i0 < tiledI; i0 += 8)
                {
                    float* src = from + ((long)j0 * rows) + k0 + i0;
                    Vector256<float> r0 = Avx.LoadVector256(src), r1 = Avx.LoadVector256(src + rows);
                    Vector256<float> r2 = Avx.LoadVector256(src + (2L * rows)), r3 = Avx.LoadVector256(src + (3L * rows));
                    Vector256<float> r4 = Avx.LoadVector256(src + (4L * rows)), r5 = Avx.LoadVector256(src + (5L * rows));
                    Vector256<float> r6 = Avx.LoadVector256(src + (6L * rows)), r7 = Avx.LoadVector256(src + (7L * rows));
                    Vector256<float> t0 = Avx.UnpackLow(r0, r1), t1 = Avx.UnpackHigh(r0, r1), t2 = Avx.UnpackLow(r2, r3), t3 = Avx.UnpackHigh(r2, r3);
                    Vector256<float> t4 = Avx.UnpackLow(r4, r5), t5 = Avx.UnpackHigh(r4, r5), t6 = Avx.UnpackLow(r6, r7), t7 = Avx.UnpackHigh(r6, r7);
                    Vector256<float> s0 = Avx.Shuffle(t0, t2, 0x44), s1 = Avx.Shuffle(t0, t2, 0xEE), s2 = Avx.Shuffle(t1, t3, 0x44), s3 = Avx.Shuffle(t1, t3, 0xEE);
                    Vector256<float> s4 = Avx.Shuffle(t4, t6, 0x44), s5 = Avx.Shuffle(t4, t6, 0xEE), s6 = Avx.Shuffle(t5, t7, 0x44), s7 = Avx.Shuffle(t5, t7, 0xEE);
                    float* dst = to + (i0 * PanelWidth) + j0;
                    Avx.Store(dst, Avx.Permute2x128(s0, s4, 0x20));
                    Avx.Store(dst + PanelWidth, Avx.Permute2x128(s1, s5, 0x20));
                    Avx.Store(dst + (2 * PanelWidth), Avx.Permute2x128(s2, s6, 0x20));
                    Avx.Store(dst + (3 * PanelWidth), Avx.Permute2x128(s3, s7, 0x20));
                    Avx.Store(dst + (4 * PanelWidth), Avx.Permute2x128(s0, s4, 0x31));
                    Avx.Store(dst + (5 * PanelWidth), Avx.Permute2x128(s1, s5, 0x31));
                    Avx.Store(dst + (6 * PanelWidth), Avx.Permute2x128(s2, s6, 0x31));
                    Avx.Store(dst + (7 * PanelWidth), Avx.Permute2x128(s3, s7, 0x31));
                }
            }
        }
        for (int j = 0; j < width; j++)
        {
            float* run = from + ((long)j * rows) + k0;
            for (int i = j < tiledJ ? tiledI : 0; i < depth; i++)
            {
                to[(i * PanelWidth) + j] = run[i];
            }
        }
    }

    /// <summary>
    /// One panel row of 64 floats as 32 words of bfloat16 pairs (<see cref="PairSlot"/>): word w holds columns w (upper
    /// half) and w + 16 (lower), word w + 16 columns w + 32 and w + 48, each rounded exactly as <see cref="ToBFloat16"/>
    /// (eight at a time where 256-bit vectors are accelerated, the same integer steps).
    /// </summary>
    private static void ToBFloat16Row(ReadOnlySpan<float> row, Span<uint> words)
    {
        if (Vector256.IsHardwareAccelerated)
        {
            for (int half = 0; half < 2; half++)
            {
                for (int w = 0; w < 16; w += 8)
                {
                    Vector256<uint> upper = RoundedBFloat16(Vector256.Create(row.Slice((half * 32) + w, 8)));
                    Vector256<uint> lower = RoundedBFloat16(Vector256.Create(row.Slice((half * 32) + 16 + w, 8)));
                    ((upper << 16) | lower).CopyTo(words.Slice((half * 16) + w, 8));
                }
            }
            return;
        }
        for (int w = 0; w < 16; w++)
        {
            words[w] = ((uint)ToBFloat16(row[w]) << 16) | ToBFloat16(row[w + 16]);
            words[w + 16] = ((uint)ToBFloat16(row[w + 32]) << 16) | ToBFloat16(row[w + 48]);
        }
    }

    /// <summary><see cref="ToBFloat16"/> of eight floats, each in the low 16 bits of its lane.</summary>
    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    private static Vector256<uint> RoundedBFloat16(Vector256<float> values)
    {
        Vector256<uint> bits = values.AsUInt32();
        Vector256<uint> rounded = (bits + (Vector256.Create(0x7FFFu) + ((bits >> 16) & Vector256<uint>.One))) >> 16;
        Vector256<uint> nan = (bits >> 16) | Vector256.Create(0x40u);
        return Vector256.ConditionalSelect(Vector256.Equals(values, values).AsUInt32(), rounded, nan);
    }

    /// <summary>
    /// Symmetric per-column int8: s_n = max_k |B[k, n]| / 127 (1 for an all-zero column) and
    /// q = round-to-even(B · (1 / s_n)), which lies in −127 … 127.
    /// </summary>
    [MethodImpl(MethodImplOptions.AggressiveOptimization)]
    private static PackedMatrix PackQuads(ReadOnlySpan<float> source, int rows, int columns, ReadOnlySpan<float> bias)
    {
        Check(source, rows, columns, bias);
        int panels = (columns + PanelWidth - 1) / PanelWidth;
        int groups = (rows + QuadDepth - 1) / QuadDepth;
        float[] scales = GC.AllocateArray<float>(panels * PanelWidth, pinned: true);
        float[] inverse = new float[columns];
        int[] sums = GC.AllocateArray<int>(panels * PanelWidth, pinned: true);
        for (int n = 0; n < columns; n++)
        {
            float max = 0;
            for (int k = 0; k < rows; k++)
            {
                max = MathF.Max(max, MathF.Abs(source[(k * columns) + n]));
            }
            scales[n] = max > 0 ? max / 127f : 1f;
            inverse[n] = 1f / scales[n];
        }
        sbyte[] quads = GC.AllocateArray<sbyte>(checked(panels * groups * PanelWidth * QuadDepth), pinned: true);
        for (int k = 0; k < rows; k++)
        {
            int g = k / QuadDepth, kk = k % QuadDepth;
            for (int n = 0; n < columns; n++)
            {
                int q = (int)Math.Clamp(MathF.Round(source[(k * columns) + n] * inverse[n]), -127f, 127f);
                int p = n / PanelWidth, j = n % PanelWidth;
                quads[((((long)p * groups) + g) * PanelWidth * QuadDepth) + (j * QuadDepth) + kk] = (sbyte)q;
                sums[n] += q;
            }
        }
        return new PackedMatrix(rows, columns, quads, scales, sums, PadBias(bias, panels));
    }

    private static float[]? PadBias(ReadOnlySpan<float> bias, int panels)
    {
        if (bias.IsEmpty)
        {
            return null;
        }
        float[] padded = GC.AllocateArray<float>(panels * PanelWidth, pinned: true);
        bias.CopyTo(padded);
        return padded;
    }
}
