using System.Buffers;
using System.Numerics.Tensors;
using System.Runtime.CompilerServices;
using System.Runtime.Intrinsics;
using System.Runtime.Intrinsics.Arm;
using System.Runtime.Intrinsics.X86;
using Assay.Config;

namespace Assay.Kernels;

internal static unsafe partial class CpuKernels
{
    /// <summary>Rows of an int8 micro-tile.</summary>
    private const int QuadRows = 6;

    /// <summary>Columns of an int8 micro-tile: two 256-bit vectors of int32 sums.</summary>
    private const int QuadColumns = 16;

    /// <summary>
    /// Quantizes each row of A (M × K, row stride <paramref name="lda"/>) to unsigned bytes for the int8 product:
    /// t_r = max_k |a_rk| / 127 (1 for an all-zero row) and u_rk = round-to-even(a_rk · (1 / t_r)) + 128, so that u − 128
    /// lies in −127 … 127. Each row takes ⌈K/4⌉·4 bytes; the padding is 128 (zero).
    /// </summary>
    internal static void QuantizeRows(ReadOnlySpan<float> a, int m, int k, int lda, Span<byte> quantized, Span<float> scales)
    {
        int ldq = (k + PackedMatrix.QuadDepth - 1) / PackedMatrix.QuadDepth * PackedMatrix.QuadDepth;
        Span<float> t = k <= 4096 ? stackalloc float[k] : new float[k];
        for (int r = 0; r < m; r++)
        {
            ReadOnlySpan<float> row = a.Slice(r * lda, k);
            float max = MathF.Abs(TensorPrimitives.MaxMagnitude(row));
            float scale = max > 0 ? max / 127f : 1f;
            TensorPrimitives.Multiply(row, 1f / scale, t);
            TensorPrimitives.Round(t, t);
            TensorPrimitives.Add(t, 128f, t);
            Span<byte> q = quantized.Slice(r * ldq, ldq);
            TensorPrimitives.ConvertToInteger<float, byte>(t, q[..k]);
            q[k..].Fill(128);
            scales[r] = scale;
        }
    }

    /// <summary>
    /// The int8 form of <see cref="Gemm"/>: A's rows quantized by <see cref="QuantizeRows"/>, B int8 per column, each
    /// output the exact integer Σ_k (u_rk − 128)·q_kn (on the <paramref name="kernel"/> path: 4-way byte dot products with
    /// AVX-VNNI; pairs of 16-bit products with AVX2 or AVX-512BW, from A widened once to u − 128 in 16 bits and B widened
    /// in registers; 4-way signed byte dot products on Arm64, from A's bytes centred in place to u − 128; or scalar
    /// integer code with the same sums), then
    /// C = [C +] (float(sum) · s_n · t_r + bias_n) in that order. The integer sums make every path give the same bits.
    /// </summary>
    private static void GemmInt8(ReadOnlySpan<float> a, int m, int lda, PackedMatrix b, Span<float> c, int ldc,
        bool accumulate, Int8Kernel kernel, ParallelOptions? parallel, Activation? epilogue)
    {
        int k = b.Rows, groups = b.Groups, ldq = groups * PackedMatrix.QuadDepth;
        byte[] quantized = ArrayPool<byte>.Shared.Rent(m * ldq);
        float[] rowScales = ArrayPool<float>.Shared.Rent(m);
        if (!KernelSelector.IsSupported(kernel))
        {
            // Never a silent slow path: the selector refuses such a setting before any command runs.
            throw new ArgumentException($"this CPU does not have the int8 path {kernel}", nameof(kernel));
        }
        bool wide = kernel is Int8Kernel.Avx2 or Int8Kernel.Avx512BW;
        bool centred = kernel == Int8Kernel.ArmDot;
        short[]? widened = wide ? ArrayPool<short>.Shared.Rent(m * ldq) : null;
        try
        {
            int blocks = (m + 31) / 32;
            if (blocks <= 1 || (long)m * k < ParallelThreshold)
            {
                QuantizeRows(a, m, k, lda, quantized, rowScales);
                if (widened is not null)
                {
                    Centre(quantized.AsSpan(0, m * ldq), widened);
                }
                else if (centred)
                {
                    CentreInPlace(quantized.AsSpan(0, m * ldq));
                }
            }
            else
            {
                fixed (float* pa = a)
                {
                    float* source = pa;
                    long length = a.Length;
                    Parallel.For(0, blocks, parallel ?? DefaultParallelism, i =>
                    {
                        int r0 = i * 32, rows = Math.Min(32, m - r0);
                        var span = new ReadOnlySpan<float>(source + ((long)r0 * lda), (int)Math.Min(length - ((long)r0 * lda), (long)rows * lda));
                        QuantizeRows(span, rows, k, lda, quantized.AsSpan(r0 * ldq, rows * ldq), rowScales.AsSpan(r0, rows));
                        if (widened is not null)
                        {
                            Centre(quantized.AsSpan(r0 * ldq, rows * ldq), widened.AsSpan(r0 * ldq, rows * ldq));
                        }
                        else if (centred)
                        {
                            CentreInPlace(quantized.AsSpan(r0 * ldq, rows * ldq));
                        }
                    });
                }
            }

            int rowTiles = (m + QuadRows - 1) / QuadRows;
            int rowTasks = (rowTiles + TilesPerTask - 1) / TilesPerTask;
            int tasks = rowTasks * b.Panels;
            fixed (byte* pq = quantized)
            fixed (short* pw = widened)
            fixed (float* pt = rowScales)
            fixed (sbyte* pb = b.Quads)
            fixed (float* ps = b.Scales)
            fixed (int* psum = b.ColumnSums)
            fixed (float* pbias = b.Bias)
            fixed (float* pc = c)
            {
                var job = new QuadJob(pq, pw, pt, m, ldq, pb, groups, b.Columns, ps, psum, pbias, pc, ldc, accumulate, kernel, rowTiles, epilogue);
                if ((long)m * b.Columns * k < ParallelThreshold || tasks == 1)
                {
                    for (int i = 0; i < tasks; i++)
                    {
                        job.Run(i / rowTasks, i % rowTasks);
                    }
                }
                else
                {
                    Parallel.For(0, tasks, parallel ?? DefaultParallelism, i => job.Run(i / rowTasks, i % rowTasks));
                }
            }
        }
        finally
        {
            ArrayPool<byte>.Shared.Return(quantized);
            ArrayPool<float>.Shared.Return(rowScales);
            if (widened is not null)
            {
                ArrayPool<short>.Shared.Return(widened);
            }
        }
    }

    /// <summary>The quantized bytes as the signed values they stand for, u − 128, in 16 bits (the padding 128 becomes 0).</summary>
    private static void Centre(ReadOnlySpan<byte> quantized, Span<short> widened)
    {
        int i = 0;
        if (Vector256.IsHardwareAccelerated)
        {
            Vector256<short> offset = Vector256.Create((short)128);
            for (; i + 32 <= quantized.Length; i += 32)
            {
                (Vector256<ushort> lo, Vector256<ushort> hi) = Vector256.Widen(Vector256.Create(quantized.Slice(i, 32)));
                (lo.AsInt16() - offset).CopyTo(widened.Slice(i, 16));
                (hi.AsInt16() - offset).CopyTo(widened.Slice(i + 16, 16));
            }
        }
        for (; i < quantized.Length; i++)
        {
            widened[i] = (short)(quantized[i] - 128);
        }
    }

    /// <summary>
    /// The quantized bytes as the signed bytes they stand for, u − 128, in place: flipping the top bit maps 128 + x to
    /// x for x in −128 … 127 (the padding 128 becomes 0).
    /// </summary>
    private static void CentreInPlace(Span<byte> quantized)
    {
        int i = 0;
        if (Vector128.IsHardwareAccelerated)
        {
            Vector128<byte> top = Vector128.Create((byte)0x80);
            for (; i + 16 <= quantized.Length; i += 16)
            {
                (Vector128.Create(quantized.Slice(i, 16)) ^ top).CopyTo(quantized.Slice(i, 16));
            }
        }
        for (; i < quantized.Length; i++)
        {
            quantized[i] ^= 0x80;
        }
    }

    private readonly struct QuadJob
    {
        private readonly byte* _a;
        private readonly short* _wide;
        private readonly float* _rowScales, _scales, _bias, _c;
        private readonly sbyte* _b;
        private readonly int* _sums;
        private readonly int _m, _ldq, _groups, _n, _ldc, _rowTiles;
        private readonly bool _accumulate;
        private readonly Int8Kernel _kernel;
        private readonly Activation? _epilogue;

        public QuadJob(byte* a, short* wide, float* rowScales, int m, int ldq, sbyte* b, int groups, int n, float* scales, int* sums,
            float* bias, float* c, int ldc, bool accumulate, Int8Kernel kernel, int rowTiles, Activation? epilogue)
        {
            _a = a; _wide = wide; _rowScales = rowScales; _m = m; _ldq = ldq; _b = b; _groups = groups; _n = n; _scales = scales;
            _sums = sums; _bias = bias; _c = c; _ldc = ldc; _accumulate = accumulate; _kernel = kernel; _rowTiles = rowTiles;
            _epilogue = epilogue;
        }

        public void Run(int panel, int rowTask)
        {
            const int W = PackedMatrix.PanelWidth, D = PackedMatrix.QuadDepth;
            sbyte* panelBase = _b + ((long)panel * _groups * W * D);
            int firstTile = rowTask * TilesPerTask;
            int lastTile = Math.Min(_rowTiles, firstTile + TilesPerTask);
            byte** rows = stackalloc byte*[QuadRows];
            short** wideRows = stackalloc short*[QuadRows];
            int* sums = stackalloc int[QuadRows * QuadColumns];
            for (int tile = firstTile; tile < lastTile; tile++)
            {
                int r0 = tile * QuadRows;
                int count = Math.Min(QuadRows, _m - r0);
                for (int r = 0; r < QuadRows; r++)
                {
                    // Rows past M repeat the tile's first row; their sums are dropped.
                    long at = (long)(r0 + (r < count ? r : 0)) * _ldq;
                    rows[r] = _a + at;
                    wideRows[r] = _wide + at;
                }
                for (int block = 0; block < W / QuadColumns; block++)
                {
                    int n0 = (panel * W) + (block * QuadColumns);
                    if (n0 >= _n)
                    {
                        break;
                    }
                    sbyte* bp = panelBase + (block * QuadColumns * D);
                    switch (_kernel)
                    {
                        case Int8Kernel.AvxVnni:
                            MicroVnni(rows, bp, _groups, sums);
                            break;
                        case Int8Kernel.Avx512BW:
                            MicroPairs512(wideRows, bp, _groups, sums);
                            break;
                        case Int8Kernel.Avx2:
                            MicroPairs256(wideRows, bp, _groups, sums, 0);
                            MicroPairs256(wideRows, bp, _groups, sums, 8);
                            break;
                        case Int8Kernel.ArmDot:
                            MicroDot(rows, bp, _groups, sums);
                            break;
                        default:
                            MicroQuadScalar(rows, bp, _groups, sums);
                            break;
                    }
                    int width = Math.Min(QuadColumns, _n - n0);
                    // The unsigned byte paths sum u·q = (u − 128)·q + 128·q; the 16-bit and signed byte paths sum (u − 128)·q already.
                    int offset = _kernel is Int8Kernel.Scalar or Int8Kernel.AvxVnni ? 128 : 0;
                    for (int r = 0; r < count; r++)
                    {
                        float t = _rowScales[r0 + r];
                        float* cRow = _c + ((long)(r0 + r) * _ldc) + n0;
                        int* rowSums = sums + (r * QuadColumns);
                        int j = 0;
                        if (Vector256.IsHardwareAccelerated)
                        {
                            // Eight columns at a time, the scalar loop's operations in its order (no fused multiply-add), so the same bits.
                            for (; j + 8 <= width; j += 8)
                            {
                                Vector256<float> v = Vector256.ConvertToSingle(Vector256.Load(rowSums + j) - (Vector256.Load(_sums + n0 + j) * offset));
                                v *= Vector256.Load(_scales + n0 + j);
                                v *= t;
                                v += _bias == null ? Vector256<float>.Zero : Vector256.Load(_bias + n0 + j);
                                (_accumulate ? Vector256.Load(cRow + j) + v : v).Store(cRow + j);
                            }
                        }
                        for (; j < width; j++)
                        {
                            float v = rowSums[j] - (offset * _sums[n0 + j]);
                            v *= _scales[n0 + j];
                            v *= t;
                            v += _bias == null ? 0f : _bias[n0 + j];
                            cRow[j] = _accumulate ? cRow[j] + v : v;
                        }
                    }
                }
                if (_epilogue is { } activation)
                {
                    int n0 = panel * W;
                    int width = Math.Min(W, _n - n0);
                    for (int r = 0; r < count; r++)
                    {
                        Activate(new Span<float>(_c + ((long)(r0 + r) * _ldc) + n0, width), activation);
                    }
                }
            }
        }
    }

    /// <summary>Integer sums of a 6 × 16 tile: u (bytes, offset by 128) times q (signed bytes), in scalar code.</summary>
    private static void MicroQuadScalar(byte** rows, sbyte* bp, int groups, int* sums)
    {
        const int W = PackedMatrix.PanelWidth, D = PackedMatrix.QuadDepth;
        for (int r = 0; r < QuadRows; r++)
        {
            for (int j = 0; j < QuadColumns; j++)
            {
                int sum = 0;
                for (int g = 0; g < groups; g++)
                {
                    sbyte* q = bp + ((long)g * W * D) + (j * D);
                    byte* u = rows[r] + (g * D);
                    sum += (u[0] * q[0]) + (u[1] * q[1]) + (u[2] * q[2]) + (u[3] * q[3]);
                }
                sums[(r * QuadColumns) + j] = sum;
            }
        }
    }

    /// <summary>The same sums with AVX-VNNI: one vpdpbusd per row and 8 columns per group of four k (12 accumulators).</summary>
    [MethodImpl(MethodImplOptions.AggressiveOptimization)]
    private static void MicroVnni(byte** rows, sbyte* bp, int groups, int* sums)
    {
        const int Stride = PackedMatrix.PanelWidth * PackedMatrix.QuadDepth;
        byte* a0 = rows[0], a1 = rows[1], a2 = rows[2], a3 = rows[3], a4 = rows[4], a5 = rows[5];
        Vector256<int> x00 = default, x01 = default, x10 = default, x11 = default, x20 = default, x21 = default;
        Vector256<int> x30 = default, x31 = default, x40 = default, x41 = default, x50 = default, x51 = default;
        for (int g = 0; g < groups; g++)
        {
            sbyte* q = bp + ((long)g * Stride);
            Vector256<sbyte> b0 = Vector256.Load(q), b1 = Vector256.Load(q + 32);
            int o = g * PackedMatrix.QuadDepth;
            Vector256<byte> v = Vector256.Create(Unsafe.ReadUnaligned<int>(a0 + o)).AsByte();
            x00 = AvxVnni.MultiplyWideningAndAdd(x00, v, b0); x01 = AvxVnni.MultiplyWideningAndAdd(x01, v, b1);
            v = Vector256.Create(Unsafe.ReadUnaligned<int>(a1 + o)).AsByte();
            x10 = AvxVnni.MultiplyWideningAndAdd(x10, v, b0); x11 = AvxVnni.MultiplyWideningAndAdd(x11, v, b1);
            v = Vector256.Create(Unsafe.ReadUnaligned<int>(a2 + o)).AsByte();
            x20 = AvxVnni.MultiplyWideningAndAdd(x20, v, b0); x21 = AvxVnni.MultiplyWideningAndAdd(x21, v, b1);
            v = Vector256.Create(Unsafe.ReadUnaligned<int>(a3 + o)).AsByte();
            x30 = AvxVnni.MultiplyWideningAndAdd(x30, v, b0); x31 = AvxVnni.MultiplyWideningAndAdd(x31, v, b1);
            v = Vector256.Create(Unsafe.ReadUnaligned<int>(a4 + o)).AsByte();
            x40 = AvxVnni.MultiplyWideningAndAdd(x40, v, b0); x41 = AvxVnni.MultiplyWideningAndAdd(x41, v, b1);
            v = Vector256.Create(Unsafe.ReadUnaligned<int>(a5 + o)).AsByte();
            x50 = AvxVnni.MultiplyWideningAndAdd(x50, v, b0); x51 = AvxVnni.MultiplyWideningAndAdd(x51, v, b1);
        }
        x00.Store(sums); x01.Store(sums + 8); x10.Store(sums + 16); x11.Store(sums + 24);
        x20.Store(sums + 32); x21.Store(sums + 40); x30.Store(sums + 48); x31.Store(sums + 56);
        x40.Store(sums + 64); x41.Store(sums + 72); x50.Store(sums + 80); x51.Store(sums + 88);
    }

    /// <summary>
    /// The same sums with the Arm64 dot-product instructions (SDOT, <see cref="Dp"/>): A's bytes centred in place to the
    /// signed u − 128, each row's four bytes of a group broadcast, and one SDOT per row and four columns (24
    /// accumulators, four column vectors and a broadcast fit the 32 registers). Signed bytes times signed bytes into int32,
    /// so the sums are the exact integers Σ (u − 128)·q.
    /// </summary>
    [MethodImpl(MethodImplOptions.AggressiveOptimization)]
    private static void MicroDot(byte** rows, sbyte* bp, int groups, int* sums)
    {
        const int Stride = PackedMatrix.PanelWidth * PackedMatrix.QuadDepth;
        byte* a0 = rows[0], a1 = rows[1], a2 = rows[2], a3 = rows[3], a4 = rows[4], a5 = rows[5];
        Vector128<int> x00 = default, x01 = default, x02 = default, x03 = default, x10 = default, x11 = default;
        Vector128<int> x12 = default, x13 = default, x20 = default, x21 = default, x22 = default, x23 = default;
        Vector128<int> x30 = default, x31 = default, x32 = default, x33 = default, x40 = default, x41 = default;
        Vector128<int> x42 = default, x43 = default, x50 = default, x51 = default, x52 = default, x53 = default;
        for (int g = 0; g < groups; g++)
        {
            sbyte* q = bp + ((long)g * Stride);
            Vector128<sbyte> b0 = Vector128.Load(q), b1 = Vector128.Load(q + 16), b2 = Vector128.Load(q + 32), b3 = Vector128.Load(q + 48);
            int o = g * PackedMatrix.QuadDepth;
            Vector128<sbyte> v = Vector128.Create(Unsafe.ReadUnaligned<int>(a0 + o)).AsSByte();
            x00 = Dp.DotProduct(x00, v, b0); x01 = Dp.DotProduct(x01, v, b1); x02 = Dp.DotProduct(x02, v, b2); x03 = Dp.DotProduct(x03, v, b3);
            v = Vector128.Create(Unsafe.ReadUnaligned<int>(a1 + o)).AsSByte();
            x10 = Dp.DotProduct(x10, v, b0); x11 = Dp.DotProduct(x11, v, b1); x12 = Dp.DotProduct(x12, v, b2); x13 = Dp.DotProduct(x13, v, b3);
            v = Vector128.Create(Unsafe.ReadUnaligned<int>(a2 + o)).AsSByte();
            x20 = Dp.DotProduct(x20, v, b0); x21 = Dp.DotProduct(x21, v, b1); x22 = Dp.DotProduct(x22, v, b2); x23 = Dp.DotProduct(x23, v, b3);
            v = Vector128.Create(Unsafe.ReadUnaligned<int>(a3 + o)).AsSByte();
            x30 = Dp.DotProduct(x30, v, b0); x31 = Dp.DotProduct(x31, v, b1); x32 = Dp.DotProduct(x32, v, b2); x33 = Dp.DotProduct(x33, v, b3);
            v = Vector128.Create(Unsafe.ReadUnaligned<int>(a4 + o)).AsSByte();
            x40 = Dp.DotProduct(x40, v, b0); x41 = Dp.DotProduct(x41, v, b1); x42 = Dp.DotProduct(x42, v, b2); x43 = Dp.DotProduct(x43, v, b3);
            v = Vector128.Create(Unsafe.ReadUnaligned<int>(a5 + o)).AsSByte();
            x50 = Dp.DotProduct(x50, v, b0); x51 = Dp.DotProduct(x51, v, b1); x52 = Dp.DotProduct(x52, v, b2); x53 = Dp.DotProduct(x53, v, b3);
        }
        x00.Store(sums); x01.Store(sums + 4); x02.Store(sums + 8); x03.Store(sums + 12);
        x10.Store(sums + 16); x11.Store(sums + 20); x12.Store(sums + 24); x13.Store(sums + 28);
        x20.Store(sums + 32); x21.Store(sums + 36); x22.Store(sums + 40); x23.Store(sums + 44);
        x30.Store(sums + 48); x31.Store(sums + 52); x32.Store(sums + 56); x33.Store(sums + 60);
        x40.Store(sums + 64); x41.Store(sums + 68); x42.Store(sums + 72); x43.Store(sums + 76);
        x50.Store(sums + 80); x51.Store(sums + 84); x52.Store(sums + 88); x53.Store(sums + 92);
    }

    /// <summary>
    /// The same sums with AVX-512BW: per group of four k, each row's four 16-bit values broadcast, each column's four
    /// bytes widened in place (vpmovsxbw), and vpmaddwd adds the products in pairs, so each 32-bit lane holds a column's
    /// k0·k1 or k2·k3 half; the two halves are added at the end. |u − 128|, |q| ≤ 127, so nothing saturates or overflows
    /// (a lane grows by at most 32,258 per group; K ≤ 266,000 stays inside int32).
    /// </summary>
    [MethodImpl(MethodImplOptions.AggressiveOptimization)]
    private static void MicroPairs512(short** rows, sbyte* bp, int groups, int* sums)
    {
        const int Stride = PackedMatrix.PanelWidth * PackedMatrix.QuadDepth;
        short* a0 = rows[0], a1 = rows[1], a2 = rows[2], a3 = rows[3], a4 = rows[4], a5 = rows[5];
        Vector512<int> x00 = default, x01 = default, x10 = default, x11 = default, x20 = default, x21 = default;
        Vector512<int> x30 = default, x31 = default, x40 = default, x41 = default, x50 = default, x51 = default;
        for (int g = 0; g < groups; g++)
        {
            sbyte* q = bp + ((long)g * Stride);
            Vector512<short> b0 = Avx512BW.ConvertToVector512Int16(Vector256.Load(q));
            Vector512<short> b1 = Avx512BW.ConvertToVector512Int16(Vector256.Load(q + 32));
            int o = g * PackedMatrix.QuadDepth;
            Vector512<short> v = Vector512.Create(Unsafe.ReadUnaligned<long>(a0 + o)).AsInt16();
            x00 += Avx512BW.MultiplyAddAdjacent(v, b0); x01 += Avx512BW.MultiplyAddAdjacent(v, b1);
            v = Vector512.Create(Unsafe.ReadUnaligned<long>(a1 + o)).AsInt16();
            x10 += Avx512BW.MultiplyAddAdjacent(v, b0); x11 += Avx512BW.MultiplyAddAdjacent(v, b1);
            v = Vector512.Create(Unsafe.ReadUnaligned<long>(a2 + o)).AsInt16();
            x20 += Avx512BW.MultiplyAddAdjacent(v, b0); x21 += Avx512BW.MultiplyAddAdjacent(v, b1);
            v = Vector512.Create(Unsafe.ReadUnaligned<long>(a3 + o)).AsInt16();
            x30 += Avx512BW.MultiplyAddAdjacent(v, b0); x31 += Avx512BW.MultiplyAddAdjacent(v, b1);
            v = Vector512.Create(Unsafe.ReadUnaligned<long>(a4 + o)).AsInt16();
            x40 += Avx512BW.MultiplyAddAdjacent(v, b0); x41 += Avx512BW.MultiplyAddAdjacent(v, b1);
            v = Vector512.Create(Unsafe.ReadUnaligned<long>(a5 + o)).AsInt16();
            x50 += Avx512BW.MultiplyAddAdjacent(v, b0); x51 += Avx512BW.MultiplyAddAdjacent(v, b1);
        }
        Halves(x00, x01, sums); Halves(x10, x11, sums + 16); Halves(x20, x21, sums + 32);
        Halves(x30, x31, sums + 48); Halves(x40, x41, sums + 64); Halves(x50, x51, sums + 80);
    }

    /// <summary>Sixteen column sums from two vectors of (k0·k1, k2·k3) halves: lanes 2j and 2j + 1 added.</summary>
    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    private static void Halves(Vector512<int> low, Vector512<int> high, int* into)
    {
        Vector512<int> even = Vector512.Create(0, 2, 4, 6, 8, 10, 12, 14, 16, 18, 20, 22, 24, 26, 28, 30);
        Vector512<int> odd = even + Vector512<int>.One;
        (Avx512F.PermuteVar16x32x2(low, even, high) + Avx512F.PermuteVar16x32x2(low, odd, high)).Store(into);
    }

    /// <summary>
    /// <see cref="MicroPairs512"/> at 256 bits (AVX2), for the eight columns from <paramref name="first"/> of the 16:
    /// 12 accumulators, two widened column vectors and a broadcast fit the 16 registers.
    /// </summary>
    [MethodImpl(MethodImplOptions.AggressiveOptimization)]
    private static void MicroPairs256(short** rows, sbyte* bp, int groups, int* sums, int first)
    {
        const int Stride = PackedMatrix.PanelWidth * PackedMatrix.QuadDepth;
        short* a0 = rows[0], a1 = rows[1], a2 = rows[2], a3 = rows[3], a4 = rows[4], a5 = rows[5];
        Vector256<int> x00 = default, x01 = default, x10 = default, x11 = default, x20 = default, x21 = default;
        Vector256<int> x30 = default, x31 = default, x40 = default, x41 = default, x50 = default, x51 = default;
        bp += first * PackedMatrix.QuadDepth;
        for (int g = 0; g < groups; g++)
        {
            sbyte* q = bp + ((long)g * Stride);
            Vector256<short> b0 = Avx2.ConvertToVector256Int16(Vector128.Load(q));
            Vector256<short> b1 = Avx2.ConvertToVector256Int16(Vector128.Load(q + 16));
            int o = g * PackedMatrix.QuadDepth;
            Vector256<short> v = Vector256.Create(Unsafe.ReadUnaligned<long>(a0 + o)).AsInt16();
            x00 += Avx2.MultiplyAddAdjacent(v, b0); x01 += Avx2.MultiplyAddAdjacent(v, b1);
            v = Vector256.Create(Unsafe.ReadUnaligned<long>(a1 + o)).AsInt16();
            x10 += Avx2.MultiplyAddAdjacent(v, b0); x11 += Avx2.MultiplyAddAdjacent(v, b1);
            v = Vector256.Create(Unsafe.ReadUnaligned<long>(a2 + o)).AsInt16();
            x20 += Avx2.MultiplyAddAdjacent(v, b0); x21 += Avx2.MultiplyAddAdjacent(v, b1);
            v = Vector256.Create(Unsafe.ReadUnaligned<long>(a3 + o)).AsInt16();
            x30 += Avx2.MultiplyAddAdjacent(v, b0); x31 += Avx2.MultiplyAddAdjacent(v, b1);
            v = Vector256.Create(Unsafe.ReadUnaligned<long>(a4 + o)).AsInt16();
            x40 += Avx2.MultiplyAddAdjacent(v, b0); x41 += Avx2.MultiplyAddAdjacent(v, b1);
            v = Vector256.Create(Unsafe.ReadUnaligned<long>(a5 + o)).AsInt16();
            x50 += Avx2.MultiplyAddAdjacent(v, b0); x51 += Avx2.MultiplyAddAdjacent(v, b1);
        }
        sums += first;
        Halves(x00, x01, sums); Halves(x10, x11, sums + 16); Halves(x20, x21, sums + 32);
        Halves(x30, x31, sums + 48); Halves(x40, x41, sums + 64); Halves(x50, x51, sums + 80);
    }

    /// <summary>Eight column sums from two vectors of (k0·k1, k2·k3) halves: vphaddd adds adjacent lanes within each 128-bit half, and a cross-lane permute puts the columns in order.</summary>
    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    private static void Halves(Vector256<int> low, Vector256<int> high, int* into)
    {
        // hadd: [l0+l1, l2+l3, h0+h1, h2+h3 | l4+l5, l6+l7, h4+h5, h6+h7] = columns [0 1 4 5 | 2 3 6 7].
        Vector256<int> added = Avx2.HorizontalAdd(low, high);
        Avx2.PermuteVar8x32(added, Vector256.Create(0, 1, 4, 5, 2, 3, 6, 7)).Store(into);
    }
}
