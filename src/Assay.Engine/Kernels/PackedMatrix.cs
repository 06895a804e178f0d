namespace Assay.Kernels;

/// <summary>
/// The right-hand matrix B (K × N) of <c>C = A·B + bias</c>, packed once at load into column panels of
/// <see cref="PanelWidth"/> columns: panel p holds, for k = 0 … K−1, the columns p·W … p·W+W−1 of row k, contiguous,
/// zero-padded past N. The GEMM micro-kernels stream a panel with unit stride. The bias, if any, is padded likewise.
/// </summary>
internal sealed class PackedMatrix
{
    /// <summary>Columns per panel: four 512-bit vectors of float32.</summary>
    public const int PanelWidth = 64;

    private PackedMatrix(int rows, int columns, float[] data, float[]? bias)
    {
        Rows = rows;
        Columns = columns;
        Data = data;
        Bias = bias;
    }

    /// <summary>K, the shared dimension.</summary>
    public int Rows { get; }

    /// <summary>N, the output width.</summary>
    public int Columns { get; }

    /// <summary>Number of column panels, ⌈N / W⌉.</summary>
    public int Panels => (Columns + PanelWidth - 1) / PanelWidth;

    /// <summary>The panels, each K·W floats, pinned so kernels can hold pointers into them.</summary>
    public float[] Data { get; }

    /// <summary>The bias padded to Panels·W floats, or null.</summary>
    public float[]? Bias { get; }

    /// <summary>Packs a row-major K × N matrix (the [in, out] layout of GPT-2's projection layers).</summary>
    public static PackedMatrix FromRowMajor(ReadOnlySpan<float> b, int rows, int columns, ReadOnlySpan<float> bias = default) =>
        Pack(b, rows, columns, transposed: false, bias);

    /// <summary>Packs the transpose of a row-major N × K matrix (an [out, in] layout, e.g. the token embedding
    /// used as the output head: logits = h · Eᵀ).</summary>
    public static PackedMatrix FromTransposed(ReadOnlySpan<float> bt, int rows, int columns) =>
        Pack(bt, rows, columns, transposed: true, default);

    /// <summary>Copies column n of B (K values; for a transposed pack, row n of the source) into destination.</summary>
    public void CopyColumn(int n, Span<float> destination)
    {
        long baseIndex = (long)(n / PanelWidth) * Rows * PanelWidth + (n % PanelWidth);
        float[] data = Data;
        for (int k = 0; k < destination.Length; k++)
        {
            destination[k] = data[baseIndex + ((long)k * PanelWidth)];
        }
    }

    private static PackedMatrix Pack(ReadOnlySpan<float> source, int rows, int columns, bool transposed, ReadOnlySpan<float> bias)
    {
        ArgumentOutOfRangeException.ThrowIfNegativeOrZero(rows);
        ArgumentOutOfRangeException.ThrowIfNegativeOrZero(columns);
        if (source.Length != (long)rows * columns)
        {
            throw new ArgumentException($"source holds {source.Length} values; {rows} × {columns} needs {(long)rows * columns}", nameof(source));
        }
        if (!bias.IsEmpty && bias.Length != columns)
        {
            throw new ArgumentException($"bias holds {bias.Length} values; expected {columns}", nameof(bias));
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
                Span<float> dst = panel.Slice(k * PanelWidth, width);
                if (transposed)
                {
                    for (int j = 0; j < width; j++)
                    {
                        dst[j] = source[((n0 + j) * rows) + k];
                    }
                }
                else
                {
                    source.Slice((k * columns) + n0, width).CopyTo(dst);
                }
            }
        }

        float[]? paddedBias = null;
        if (!bias.IsEmpty)
        {
            paddedBias = GC.AllocateArray<float>(panels * PanelWidth, pinned: true);
            bias.CopyTo(paddedBias);
        }
        return new PackedMatrix(rows, columns, data, paddedBias);
    }
}
