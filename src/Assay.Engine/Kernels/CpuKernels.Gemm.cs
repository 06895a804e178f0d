using System.Diagnostics;
using System.Runtime.CompilerServices;
using System.Runtime.Intrinsics;
using Assay.Config;
using Assay.Weights;

namespace Assay.Kernels;

internal static unsafe partial class CpuKernels
{
    /// <summary>Output rows that one parallel work item covers, in micro-tiles.</summary>
    private const int TilesPerTask = 8;

    /// <summary>
    /// Rows of k per pass of a task's tiles over one panel: 128 × 64 columns of B is 32 KiB in float32 (16 in
    /// bfloat16), which eight tiles read again from the inner caches, and a tile's six rows of A over the block (3 KiB)
    /// stay in level 1. At K = 3,072 a whole panel (768 KiB) overflows level 2 and was read again from further out for
    /// every tile; on AMD family 25 model 1, 128 measured a little faster than 256 at most GPT-2-small shapes.
    /// </summary>
    private const int DepthBlock = 128;

    /// <summary>Below this many multiply-adds a GEMM runs on the calling thread.</summary>
    private const long ParallelThreshold = 1 << 18;

    /// <summary>No bound on the worker threads.</summary>
    public static readonly ParallelOptions DefaultParallelism = new();

    /// <summary>
    /// C = A·B + bias, or C += A·B + bias when <paramref name="accumulate"/> (a fused residual add), then the
    /// activation <paramref name="epilogue"/> applied to each finished tile while it is in cache (a fused bias + GELU).
    /// A is M × K row-major with row stride <paramref name="lda"/>; C is M × N with row stride <paramref name="ldc"/>.
    /// B may hold float32 or bfloat16 panels (int8 goes to <see cref="GemmInt8"/>); each output element is one float32 dot product over
    /// k = 0 … K−1 in order, so results do not depend on the thread count or the kernel path.
    /// <paramref name="parallel"/> bounds the worker threads (null: all cores); <paramref name="int8"/> picks the
    /// integer path of an int8 B (null: <see cref="KernelSelector.CurrentInt8"/>).
    /// </summary>
    public static void Gemm(ReadOnlySpan<float> a, int m, int lda, PackedMatrix b, Span<float> c, int ldc,
        bool accumulate, KernelVariant variant, ParallelOptions? parallel = null, Activation? epilogue = null, Int8Kernel? int8 = null)
    {
        int k = b.Rows;
        int n = b.Columns;
        Debug.Assert(lda >= k && ldc >= n);
        Debug.Assert(m == 0 || a.Length >= ((m - 1) * (long)lda) + k);
        Debug.Assert(m == 0 || c.Length >= ((m - 1) * (long)ldc) + n);
        if (m == 0)
        {
            return;
        }
        if (b.Precision == WeightPrecision.Integer8)
        {
            GemmInt8(a, m, lda, b, c, ldc, accumulate, int8 ?? KernelSelector.CurrentInt8, parallel, epilogue);
            return;
        }

        int mr = MicroRows(variant);
        int rowTiles = (m + mr - 1) / mr;
        int rowTasks = (rowTiles + TilesPerTask - 1) / TilesPerTask;
        int panels = b.Panels;
        int tasks = rowTasks * panels;

        fixed (float* pa = a)
        fixed (float* pc = c)
        fixed (float* pf = b.Data)
        fixed (uint* pp = b.Pairs)
        fixed (float* pbias = b.Bias)
        {
            var job = new GemmJob(pa, m, lda, pf != null ? (byte*)pf : (byte*)pp, pf != null, k, n, pbias, pc, ldc,
                accumulate, variant, mr, rowTiles, epilogue);
            if ((long)m * n * k < ParallelThreshold || tasks == 1)
            {
                for (int t = 0; t < tasks; t++)
                {
                    job.Run(t / rowTasks, t % rowTasks);
                }
            }
            else
            {
                // Panel-major order keeps one panel of B hot in cache while a worker walks its rows.
                Parallel.For(0, tasks, parallel ?? DefaultParallelism, t => job.Run(t / rowTasks, t % rowTasks));
            }
        }
    }

    private static int MicroRows(KernelVariant variant) => variant switch
    {
        KernelVariant.Vector512 => 6,
        KernelVariant.Vector256 => 6,
        _ => 4,   // Vector128: 4 rows × a quarter panel; scalar: 4 rows × 64
    };

    private readonly struct GemmJob
    {
        private readonly float* _a, _bias, _c;
        private readonly byte* _b;
        private readonly bool _float32;
        private readonly int _m, _lda, _k, _n, _ldc, _mr, _rowTiles;
        private readonly bool _accumulate;
        private readonly KernelVariant _variant;
        private readonly Activation? _epilogue;

        public GemmJob(float* a, int m, int lda, byte* b, bool float32, int k, int n, float* bias, float* c, int ldc,
            bool accumulate, KernelVariant variant, int mr, int rowTiles, Activation? epilogue)
        {
            _a = a; _m = m; _lda = lda; _b = b; _float32 = float32; _k = k; _n = n; _bias = bias; _c = c; _ldc = ldc;
            _accumulate = accumulate; _variant = variant; _mr = mr; _rowTiles = rowTiles; _epilogue = epilogue;
        }

        public void Run(int panel, int rowTask)
        {
            const int W = PackedMatrix.PanelWidth;
            int rowBytes = _float32 ? Float32Panel.RowBytes : PairPanel.RowBytes;
            byte* bp = _b + ((long)panel * _k * rowBytes);
            float* bias = _bias == null ? null : _bias + (panel * W);
            int n0 = panel * W;
            int width = Math.Min(W, _n - n0);
            int firstTile = rowTask * TilesPerTask;
            int lastTile = Math.Min(_rowTiles, firstTile + TilesPerTask);
            float** rows = stackalloc float*[6];
            float* scratch = stackalloc float[6 * W];

            // Full tiles pass over the panel DepthBlock rows of k at a time, every tile of the task per block, so the
            // block of B stays in cache while the tiles read it; each chain goes on in order through C, which holds
            // float32 between blocks exactly, and the bias is added after the last block, as in one pass.
            for (int k0 = 0; k0 < _k; k0 += DepthBlock)
            {
                int depth = Math.Min(DepthBlock, _k - k0);
                bool lastBlock = k0 + depth == _k;
                for (int tile = firstTile; tile < lastTile; tile++)
                {
                    int r0 = tile * _mr;
                    if (r0 + _mr > _m || width < W)
                    {
                        continue;
                    }
                    for (int r = 0; r < _mr; r++)
                    {
                        rows[r] = _a + ((long)(r0 + r) * _lda) + k0;
                    }
                    Micro(rows, bp + ((long)k0 * rowBytes), depth, lastBlock ? bias : null, _c + ((long)r0 * _ldc) + n0, _ldc, _accumulate || k0 > 0);
                }
            }

            for (int tile = firstTile; tile < lastTile; tile++)
            {
                int r0 = tile * _mr;
                int count = Math.Min(_mr, _m - r0);
                float* cTile = _c + ((long)r0 * _ldc) + n0;
                if (count < _mr || width < W)
                {
                    // A ragged tile runs in one pass through scratch. Rows past M repeat the tile's first row; their
                    // results land in scratch and are dropped.
                    for (int r = 0; r < _mr; r++)
                    {
                        rows[r] = _a + ((long)(r0 + (r < count ? r : 0)) * _lda);
                    }
                    new Span<float>(scratch, 6 * W).Clear();
                    if (_accumulate)
                    {
                        for (int r = 0; r < count; r++)
                        {
                            new ReadOnlySpan<float>(cTile + ((long)r * _ldc), width).CopyTo(new Span<float>(scratch + (r * W), width));
                        }
                    }
                    Micro(rows, bp, _k, bias, scratch, W, _accumulate);
                    for (int r = 0; r < count; r++)
                    {
                        new ReadOnlySpan<float>(scratch + (r * W), width).CopyTo(new Span<float>(cTile + ((long)r * _ldc), width));
                    }
                }
                if (_epilogue is { } activation)
                {
                    for (int r = 0; r < count; r++)
                    {
                        Activate(new Span<float>(cTile + ((long)r * _ldc), width), activation);
                    }
                }
            }
        }

        [MethodImpl(MethodImplOptions.AggressiveInlining)]
        private void Micro(float** rows, byte* bp, int k, float* bias, float* c, int ldc, bool accumulate)
        {
            if (_float32)
            {
                MicroTile<Float32Panel>(_variant, rows, bp, k, bias, c, ldc, accumulate);
            }
            else
            {
                MicroTile<PairPanel>(_variant, rows, bp, k, bias, c, ldc, accumulate);
            }
        }
    }

    /// <summary>
    /// One micro-tile on <paramref name="variant"/>'s path: <see cref="MicroRows"/> rows of A (<paramref name="rows"/>)
    /// times one packed panel of <paramref name="k"/> rows, plus the bias, into a full panel width of C, or added to C
    /// when <paramref name="accumulate"/>. Each element is one fused multiply-add chain over k in order on every path.
    /// </summary>
    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    private static void MicroTile<TPanel>(KernelVariant variant, float** rows, byte* bp, int k, float* bias, float* c, int ldc, bool accumulate)
        where TPanel : struct, IPanelRow
    {
        switch (variant)
        {
            case KernelVariant.Vector512:
                MicroVector512<TPanel>(rows, bp, k, bias, c, ldc, accumulate);
                break;
            case KernelVariant.Vector256:
                MicroVector256<TPanel, Quarter0>(rows, bp, k, bias, c, ldc, accumulate);
                MicroVector256<TPanel, Quarter1>(rows, bp, k, bias == null ? null : bias + 16, c + 16, ldc, accumulate);
                MicroVector256<TPanel, Quarter2>(rows, bp, k, bias == null ? null : bias + 32, c + 32, ldc, accumulate);
                MicroVector256<TPanel, Quarter3>(rows, bp, k, bias == null ? null : bias + 48, c + 48, ldc, accumulate);
                break;
            case KernelVariant.Vector128:
                MicroVector128<TPanel, Quarter0>(rows, bp, k, bias, c, ldc, accumulate);
                MicroVector128<TPanel, Quarter1>(rows, bp, k, bias == null ? null : bias + 16, c + 16, ldc, accumulate);
                MicroVector128<TPanel, Quarter2>(rows, bp, k, bias == null ? null : bias + 32, c + 32, ldc, accumulate);
                MicroVector128<TPanel, Quarter3>(rows, bp, k, bias == null ? null : bias + 48, c + 48, ldc, accumulate);
                break;
            default:
                MicroScalar<TPanel>(rows, bp, k, bias, c, ldc, accumulate);
                break;
        }
    }

    /// <summary>
    /// Which quarter of a panel (16 columns) a Vector256 or Vector128 tile covers, as a type argument: each quarter is
    /// then its own compiled kernel whose loads have constant offsets and no branch on the quarter (with the quarter as
    /// a value, the JIT recomputed the offsets in every iteration and kept one on the stack).
    /// </summary>
    private interface IQuarter
    {
        static abstract int U { get; }
    }

    private readonly struct Quarter0 : IQuarter { public static int U => 0; }

    private readonly struct Quarter1 : IQuarter { public static int U => 1; }

    private readonly struct Quarter2 : IQuarter { public static int U => 2; }

    private readonly struct Quarter3 : IQuarter { public static int U => 3; }

    /// <summary>Reads one packed panel row (64 columns of B at one k) as float32, whatever its storage.</summary>
    private interface IPanelRow
    {
        /// <summary>Bytes from one k to the next.</summary>
        static abstract int RowBytes { get; }

        /// <summary>Column j of the row.</summary>
        static abstract float Load(byte* row, int j);

        /// <summary>Columns 16q … 16q + 15.</summary>
        static abstract Vector512<float> Load512(byte* row, int q);

        /// <summary>Columns 32h + 8q … 32h + 8q + 7.</summary>
        static abstract Vector256<float> Load256(byte* row, int h, int q);

        /// <summary>Columns 16u + 4q … 16u + 4q + 3 (quarter u of the panel).</summary>
        static abstract Vector128<float> Load128(byte* row, int u, int q);
    }

    /// <summary>float32 panels: 64 floats per row.</summary>
    private readonly struct Float32Panel : IPanelRow
    {
        public static int RowBytes => PackedMatrix.PanelWidth * sizeof(float);

        [MethodImpl(MethodImplOptions.AggressiveInlining)]
        public static float Load(byte* row, int j) => ((float*)row)[j];

        [MethodImpl(MethodImplOptions.AggressiveInlining)]
        public static Vector512<float> Load512(byte* row, int q) => Vector512.Load((float*)row + (16 * q));

        [MethodImpl(MethodImplOptions.AggressiveInlining)]
        public static Vector256<float> Load256(byte* row, int h, int q) => Vector256.Load((float*)row + (32 * h) + (8 * q));

        [MethodImpl(MethodImplOptions.AggressiveInlining)]
        public static Vector128<float> Load128(byte* row, int u, int q) => Vector128.Load((float*)row + (16 * u) + (4 * q));
    }

    /// <summary>bfloat16 panels: 32 words per row, two columns per word (see <see cref="PackedMatrix"/>).</summary>
    private readonly struct PairPanel : IPanelRow
    {
        public static int RowBytes => PackedMatrix.PairWidth * sizeof(uint);

        [MethodImpl(MethodImplOptions.AggressiveInlining)]
        public static float Load(byte* row, int j)
        {
            (int word, bool upper) = PackedMatrix.PairSlot(j);
            return PackedMatrix.Widen(((uint*)row)[word], upper);
        }

        [MethodImpl(MethodImplOptions.AggressiveInlining)]
        public static Vector512<float> Load512(byte* row, int q)
        {
            // q = 0: upper halves of words 0–15; 1: their lower halves; 2 and 3: the same for words 16–31.
            Vector512<uint> w = Vector512.Load((uint*)row + (16 * (q >> 1)));
            return ((q & 1) == 0 ? w & Vector512.Create(0xFFFF0000u) : Vector512.ShiftLeft(w, 16)).AsSingle();
        }

        [MethodImpl(MethodImplOptions.AggressiveInlining)]
        public static Vector256<float> Load256(byte* row, int h, int q)
        {
            // Columns 32h + 8q: q = 0, 1 are upper halves of words 16h + 8q; q = 2, 3 lower halves of words 16h + 8(q − 2).
            Vector256<uint> w = Vector256.Load((uint*)row + (16 * h) + (8 * (q & 1)));
            return (q < 2 ? w & Vector256.Create(0xFFFF0000u) : Vector256.ShiftLeft(w, 16)).AsSingle();
        }

        [MethodImpl(MethodImplOptions.AggressiveInlining)]
        public static Vector128<float> Load128(byte* row, int u, int q)
        {
            // Quarter u: columns 16u … 16u + 15 are the upper (u even) or lower (u odd) halves of words 16(u >> 1) … + 15.
            Vector128<uint> w = Vector128.Load((uint*)row + (16 * (u >> 1)) + (4 * q));
            return ((u & 1) == 0 ? w & Vector128.Create(0xFFFF0000u) : Vector128.ShiftLeft(w, 16)).AsSingle();
        }
    }

    /// <summary>A 4 × 64 tile with scalar arithmetic, accumulating over k in order.</summary>
    [MethodImpl(MethodImplOptions.AggressiveOptimization)]
    private static void MicroScalar<TPanel>(float** rows, byte* bp, int k, float* bias, float* c, int ldc, bool accumulate)
        where TPanel : struct, IPanelRow
    {
        const int W = PackedMatrix.PanelWidth;
        float* acc = stackalloc float[4 * W];
        for (int r = 0; r < 4; r++)
        {
            for (int j = 0; j < W; j++)
            {
                acc[(r * W) + j] = accumulate ? c[((long)r * ldc) + j] : 0f;
            }
        }
        for (int p = 0; p < k; p++)
        {
            byte* bRow = bp + ((long)p * TPanel.RowBytes);
            for (int r = 0; r < 4; r++)
            {
                float av = rows[r][p];
                float* accRow = acc + (r * W);
                for (int j = 0; j < W; j++)
                {
                    accRow[j] = MathF.FusedMultiplyAdd(av, TPanel.Load(bRow, j), accRow[j]);
                }
            }
        }
        for (int r = 0; r < 4; r++)
        {
            for (int j = 0; j < W; j++)
            {
                c[((long)r * ldc) + j] = acc[(r * W) + j] + (bias == null ? 0f : bias[j]);
            }
        }
    }

    /// <summary>A 4 × 16 tile (quarter <typeparamref name="TQuarter"/> of a panel) in 128-bit vectors (16 accumulators).</summary>
    [MethodImpl(MethodImplOptions.AggressiveOptimization)]
    private static void MicroVector128<TPanel, TQuarter>(float** rows, byte* bp, int k, float* bias, float* c, int ldc, bool accumulate)
        where TPanel : struct, IPanelRow
        where TQuarter : struct, IQuarter
    {
        int u = TQuarter.U;
        float* a0 = rows[0], a1 = rows[1], a2 = rows[2], a3 = rows[3];
        float* c0 = c, c1 = c + ldc, c2 = c + (2L * ldc), c3 = c + (3L * ldc);
        Vector128<float> z = Vector128<float>.Zero;
        Vector128<float> x00 = accumulate ? Vector128.Load(c0) : z, x01 = accumulate ? Vector128.Load(c0 + 4) : z;
        Vector128<float> x02 = accumulate ? Vector128.Load(c0 + 8) : z, x03 = accumulate ? Vector128.Load(c0 + 12) : z;
        Vector128<float> x10 = accumulate ? Vector128.Load(c1) : z, x11 = accumulate ? Vector128.Load(c1 + 4) : z;
        Vector128<float> x12 = accumulate ? Vector128.Load(c1 + 8) : z, x13 = accumulate ? Vector128.Load(c1 + 12) : z;
        Vector128<float> x20 = accumulate ? Vector128.Load(c2) : z, x21 = accumulate ? Vector128.Load(c2 + 4) : z;
        Vector128<float> x22 = accumulate ? Vector128.Load(c2 + 8) : z, x23 = accumulate ? Vector128.Load(c2 + 12) : z;
        Vector128<float> x30 = accumulate ? Vector128.Load(c3) : z, x31 = accumulate ? Vector128.Load(c3 + 4) : z;
        Vector128<float> x32 = accumulate ? Vector128.Load(c3 + 8) : z, x33 = accumulate ? Vector128.Load(c3 + 12) : z;
        byte* bRow = bp;
        for (int p = 0; p < k; p++, bRow += TPanel.RowBytes)
        {
            Vector128<float> b0 = TPanel.Load128(bRow, u, 0), b1 = TPanel.Load128(bRow, u, 1);
            Vector128<float> b2 = TPanel.Load128(bRow, u, 2), b3 = TPanel.Load128(bRow, u, 3);
            Vector128<float> v = Vector128.Create(a0[p]);
            x00 = Vector128.FusedMultiplyAdd(v, b0, x00); x01 = Vector128.FusedMultiplyAdd(v, b1, x01);
            x02 = Vector128.FusedMultiplyAdd(v, b2, x02); x03 = Vector128.FusedMultiplyAdd(v, b3, x03);
            v = Vector128.Create(a1[p]);
            x10 = Vector128.FusedMultiplyAdd(v, b0, x10); x11 = Vector128.FusedMultiplyAdd(v, b1, x11);
            x12 = Vector128.FusedMultiplyAdd(v, b2, x12); x13 = Vector128.FusedMultiplyAdd(v, b3, x13);
            v = Vector128.Create(a2[p]);
            x20 = Vector128.FusedMultiplyAdd(v, b0, x20); x21 = Vector128.FusedMultiplyAdd(v, b1, x21);
            x22 = Vector128.FusedMultiplyAdd(v, b2, x22); x23 = Vector128.FusedMultiplyAdd(v, b3, x23);
            v = Vector128.Create(a3[p]);
            x30 = Vector128.FusedMultiplyAdd(v, b0, x30); x31 = Vector128.FusedMultiplyAdd(v, b1, x31);
            x32 = Vector128.FusedMultiplyAdd(v, b2, x32); x33 = Vector128.FusedMultiplyAdd(v, b3, x33);
        }
        if (bias != null)
        {
            Vector128<float> y0 = Vector128.Load(bias), y1 = Vector128.Load(bias + 4);
            Vector128<float> y2 = Vector128.Load(bias + 8), y3 = Vector128.Load(bias + 12);
            x00 += y0; x01 += y1; x02 += y2; x03 += y3;
            x10 += y0; x11 += y1; x12 += y2; x13 += y3;
            x20 += y0; x21 += y1; x22 += y2; x23 += y3;
            x30 += y0; x31 += y1; x32 += y2; x33 += y3;
        }
        x00.Store(c0); x01.Store(c0 + 4); x02.Store(c0 + 8); x03.Store(c0 + 12);
        x10.Store(c1); x11.Store(c1 + 4); x12.Store(c1 + 8); x13.Store(c1 + 12);
        x20.Store(c2); x21.Store(c2 + 4); x22.Store(c2 + 8); x23.Store(c2 + 12);
        x30.Store(c3); x31.Store(c3 + 4); x32.Store(c3 + 8); x33.Store(c3 + 12);
    }

    /// <summary>
    /// A 6 × 16 tile (quarter <typeparamref name="TQuarter"/> of a panel) in 256-bit vectors: 12 accumulators, 2 panel loads and
    /// 6 broadcasts per k, 15 registers in all, so it fits the 16 that AVX2 has without AVX-512 (a 3 × 32 tile needs 17
    /// and spilled there, at about 40 % of the FMA peak).
    /// </summary>
    [MethodImpl(MethodImplOptions.AggressiveOptimization)]
    private static void MicroVector256<TPanel, TQuarter>(float** rows, byte* bp, int k, float* bias, float* c, int ldc, bool accumulate)
        where TPanel : struct, IPanelRow
        where TQuarter : struct, IQuarter
    {
        // Columns 16u … 16u + 15 are loads 2(u & 1) and 2(u & 1) + 1 of half u >> 1.
        int h = TQuarter.U >> 1, q = 2 * (TQuarter.U & 1);
        float* a0 = rows[0], a1 = rows[1], a2 = rows[2], a3 = rows[3], a4 = rows[4], a5 = rows[5];
        float* c0 = c, c1 = c + ldc, c2 = c + (2L * ldc), c3 = c + (3L * ldc), c4 = c + (4L * ldc), c5 = c + (5L * ldc);
        Vector256<float> z = Vector256<float>.Zero;
        Vector256<float> x00 = accumulate ? Vector256.Load(c0) : z, x01 = accumulate ? Vector256.Load(c0 + 8) : z;
        Vector256<float> x10 = accumulate ? Vector256.Load(c1) : z, x11 = accumulate ? Vector256.Load(c1 + 8) : z;
        Vector256<float> x20 = accumulate ? Vector256.Load(c2) : z, x21 = accumulate ? Vector256.Load(c2 + 8) : z;
        Vector256<float> x30 = accumulate ? Vector256.Load(c3) : z, x31 = accumulate ? Vector256.Load(c3 + 8) : z;
        Vector256<float> x40 = accumulate ? Vector256.Load(c4) : z, x41 = accumulate ? Vector256.Load(c4 + 8) : z;
        Vector256<float> x50 = accumulate ? Vector256.Load(c5) : z, x51 = accumulate ? Vector256.Load(c5 + 8) : z;
        byte* bRow = bp;
        for (int p = 0; p < k; p++, bRow += TPanel.RowBytes)
        {
            Vector256<float> b0 = TPanel.Load256(bRow, h, q), b1 = TPanel.Load256(bRow, h, q + 1);
            Vector256<float> v = Vector256.Create(a0[p]);
            x00 = Vector256.FusedMultiplyAdd(v, b0, x00); x01 = Vector256.FusedMultiplyAdd(v, b1, x01);
            v = Vector256.Create(a1[p]);
            x10 = Vector256.FusedMultiplyAdd(v, b0, x10); x11 = Vector256.FusedMultiplyAdd(v, b1, x11);
            v = Vector256.Create(a2[p]);
            x20 = Vector256.FusedMultiplyAdd(v, b0, x20); x21 = Vector256.FusedMultiplyAdd(v, b1, x21);
            v = Vector256.Create(a3[p]);
            x30 = Vector256.FusedMultiplyAdd(v, b0, x30); x31 = Vector256.FusedMultiplyAdd(v, b1, x31);
            v = Vector256.Create(a4[p]);
            x40 = Vector256.FusedMultiplyAdd(v, b0, x40); x41 = Vector256.FusedMultiplyAdd(v, b1, x41);
            v = Vector256.Create(a5[p]);
            x50 = Vector256.FusedMultiplyAdd(v, b0, x50); x51 = Vector256.FusedMultiplyAdd(v, b1, x51);
        }
        if (bias != null)
        {
            Vector256<float> y0 = Vector256.Load(bias), y1 = Vector256.Load(bias + 8);
            x00 += y0; x01 += y1; x10 += y0; x11 += y1; x20 += y0; x21 += y1;
            x30 += y0; x31 += y1; x40 += y0; x41 += y1; x50 += y0; x51 += y1;
        }
        x00.Store(c0); x01.Store(c0 + 8); x10.Store(c1); x11.Store(c1 + 8); x20.Store(c2); x21.Store(c2 + 8);
        x30.Store(c3); x31.Store(c3 + 8); x40.Store(c4); x41.Store(c4 + 8); x50.Store(c5); x51.Store(c5 + 8);
    }

    /// <summary>A 6 × 64 tile in 512-bit vectors (24 accumulators, 4 panel loads and 6 broadcasts per k).</summary>
    [MethodImpl(MethodImplOptions.AggressiveOptimization)]
    private static void MicroVector512<TPanel>(float** rows, byte* bp, int k, float* bias, float* c, int ldc, bool accumulate)
        where TPanel : struct, IPanelRow
    {
        float* a0 = rows[0], a1 = rows[1], a2 = rows[2], a3 = rows[3], a4 = rows[4], a5 = rows[5];
        float* c0 = c, c1 = c + ldc, c2 = c + (2L * ldc), c3 = c + (3L * ldc), c4 = c + (4L * ldc), c5 = c + (5L * ldc);
        Vector512<float> z = Vector512<float>.Zero;
        Vector512<float> x00 = accumulate ? Vector512.Load(c0) : z, x01 = accumulate ? Vector512.Load(c0 + 16) : z;
        Vector512<float> x02 = accumulate ? Vector512.Load(c0 + 32) : z, x03 = accumulate ? Vector512.Load(c0 + 48) : z;
        Vector512<float> x10 = accumulate ? Vector512.Load(c1) : z, x11 = accumulate ? Vector512.Load(c1 + 16) : z;
        Vector512<float> x12 = accumulate ? Vector512.Load(c1 + 32) : z, x13 = accumulate ? Vector512.Load(c1 + 48) : z;
        Vector512<float> x20 = accumulate ? Vector512.Load(c2) : z, x21 = accumulate ? Vector512.Load(c2 + 16) : z;
        Vector512<float> x22 = accumulate ? Vector512.Load(c2 + 32) : z, x23 = accumulate ? Vector512.Load(c2 + 48) : z;
        Vector512<float> x30 = accumulate ? Vector512.Load(c3) : z, x31 = accumulate ? Vector512.Load(c3 + 16) : z;
        Vector512<float> x32 = accumulate ? Vector512.Load(c3 + 32) : z, x33 = accumulate ? Vector512.Load(c3 + 48) : z;
        Vector512<float> x40 = accumulate ? Vector512.Load(c4) : z, x41 = accumulate ? Vector512.Load(c4 + 16) : z;
        Vector512<float> x42 = accumulate ? Vector512.Load(c4 + 32) : z, x43 = accumulate ? Vector512.Load(c4 + 48) : z;
        Vector512<float> x50 = accumulate ? Vector512.Load(c5) : z, x51 = accumulate ? Vector512.Load(c5 + 16) : z;
        Vector512<float> x52 = accumulate ? Vector512.Load(c5 + 32) : z, x53 = accumulate ? Vector512.Load(c5 + 48) : z;
        for (int p = 0; p < k; p++)
        {
            byte* bRow = bp + ((long)p * TPanel.RowBytes);
            Vector512<float> b0 = TPanel.Load512(bRow, 0), b1 = TPanel.Load512(bRow, 1);
            Vector512<float> b2 = TPanel.Load512(bRow, 2), b3 = TPanel.Load512(bRow, 3);
            Vector512<float> v = Vector512.Create(a0[p]);
            x00 = Vector512.FusedMultiplyAdd(v, b0, x00); x01 = Vector512.FusedMultiplyAdd(v, b1, x01);
            x02 = Vector512.FusedMultiplyAdd(v, b2, x02); x03 = Vector512.FusedMultiplyAdd(v, b3, x03);
            v = Vector512.Create(a1[p]);
            x10 = Vector512.FusedMultiplyAdd(v, b0, x10); x11 = Vector512.FusedMultiplyAdd(v, b1, x11);
            x12 = Vector512.FusedMultiplyAdd(v, b2, x12); x13 = Vector512.FusedMultiplyAdd(v, b3, x13);
            v = Vector512.Create(a2[p]);
            x20 = Vector512.FusedMultiplyAdd(v, b0, x20); x21 = Vector512.FusedMultiplyAdd(v, b1, x21);
            x22 = Vector512.FusedMultiplyAdd(v, b2, x22); x23 = Vector512.FusedMultiplyAdd(v, b3, x23);
            v = Vector512.Create(a3[p]);
            x30 = Vector512.FusedMultiplyAdd(v, b0, x30); x31 = Vector512.FusedMultiplyAdd(v, b1, x31);
            x32 = Vector512.FusedMultiplyAdd(v, b2, x32); x33 = Vector512.FusedMultiplyAdd(v, b3, x33);
            v = Vector512.Create(a4[p]);
            x40 = Vector512.FusedMultiplyAdd(v, b0, x40); x41 = Vector512.FusedMultiplyAdd(v, b1, x41);
            x42 = Vector512.FusedMultiplyAdd(v, b2, x42); x43 = Vector512.FusedMultiplyAdd(v, b3, x43);
            v = Vector512.Create(a5[p]);
            x50 = Vector512.FusedMultiplyAdd(v, b0, x50); x51 = Vector512.FusedMultiplyAdd(v, b1, x51);
            x52 = Vector512.FusedMultiplyAdd(v, b2, x52); x53 = Vector512.FusedMultiplyAdd(v, b3, x53);
        }
        if (bias != null)
        {
            Vector512<float> y0 = Vector512.Load(bias), y1 = Vector512.Load(bias + 16);
            Vector512<float> y2 = Vector512.Load(bias + 32), y3 = Vector512.Load(bias + 48);
            x00 += y0; x01 += y1; x02 += y2; x03 += y3;
            x10 += y0; x11 += y1; x12 += y2; x13 += y3;
            x20 += y0; x21 += y1; x22 += y2; x23 += y3;
            x30 += y0; x31 += y1; x32 += y2; x33 += y3;
            x40 += y0; x41 += y1; x42 += y2; x43 += y3;
            x50 += y0; x51 += y1; x52 += y2; x53 += y3;
        }
        x00.Store(c0); x01.Store(c0 + 16); x02.Store(c0 + 32); x03.Store(c0 + 48);
        x10.Store(c1); x11.Store(c1 + 16); x12.Store(c1 + 32); x13.Store(c1 + 48);
        x20.Store(c2); x21.Store(c2 + 16); x22.Store(c2 + 32); x23.Store(c2 + 48);
        x30.Store(c3); x31.Store(c3 + 16); x32.Store(c3 + 32); x33.Store(c3 + 48);
        x40.Store(c4); x41.Store(c4 + 16); x42.Store(c4 + 32); x43.Store(c4 + 48);
        x50.Store(c5); x51.Store(c5 + 16); x52.Store(c5 + 32); x53.Store(c5 + 48);
    }
}
