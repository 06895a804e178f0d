namespace Assay.Kernels;

/// <summary>
/// The working memory of <see cref="CpuKernels.CausalAttentionGroup"/> for one worker: one key/value head's keys and
/// values packed as GEMM panels for sequences of up to <see cref="Capacity"/> positions, and one block of query rows
/// with its scores and outputs. A worker reuses it for every head, sequence and layer of a forward pass.
/// </summary>
internal sealed class AttentionScratch
{
    /// <summary>Query rows (positions × the query heads of a group) a block holds, before padding.</summary>
    private const int RowsPerBlock = 48;

    /// <summary>Rows are padded to a multiple of every variant's micro-tile height (6, 4 and 3).</summary>
    private const int RowMultiple = 12;

    private const int W = PackedMatrix.PanelWidth;

    public AttentionScratch(AttentionShape shape, int capacity)
    {
        ArgumentOutOfRangeException.ThrowIfNegativeOrZero(capacity);
        Shape = shape;
        Capacity = capacity;
        BlockPositions = BlockPositionsFor(shape);
        ValuePanels = (shape.HeadWidth + W - 1) / W;
        (long keys, long values, long queries, long scores, long outputs) = Lengths(shape, capacity);
        Keys = new float[keys];
        Values = new float[values];
        Queries = new float[queries];
        Scores = new float[scores];
        Output = new float[outputs];
    }

    /// <summary>The heads it was sized for (the window does not change the sizes).</summary>
    public AttentionShape Shape { get; }

    /// <summary>The longest sequence it holds.</summary>
    public int Capacity { get; }

    /// <summary>Query positions per block.</summary>
    public int BlockPositions { get; }

    /// <summary>Panels of 64 head columns (the last zero-padded).</summary>
    public int ValuePanels { get; }

    /// <summary>Key panel p: for each head column c, keys 64p … 64p + 63 (Kᵀ in GEMM panels).</summary>
    public float[] Keys { get; }

    /// <summary>Value panel p: for each position, head columns 64p … 64p + 63.</summary>
    public float[] Values { get; }

    /// <summary>The block's query rows, row-major, head width apart.</summary>
    public float[] Queries { get; }

    /// <summary>The block's scores, then probabilities: one row per query row over the keys the block reads.</summary>
    public float[] Scores { get; }

    /// <summary>The block's outputs, <see cref="ValuePanels"/> × 64 wide.</summary>
    public float[] Output { get; }

    /// <summary>The query blocks of a sequence of <paramref name="length"/> positions.</summary>
    public int Blocks(int length) => BlocksFor(Shape, length);

    /// <summary>The query blocks of a sequence of <paramref name="length"/> positions under <paramref name="shape"/>.</summary>
    public static int BlocksFor(AttentionShape shape, int length) =>
        (length + BlockPositionsFor(shape) - 1) / BlockPositionsFor(shape);

    /// <summary>True when it holds <paramref name="shape"/>'s heads over <paramref name="length"/> positions.</summary>
    public bool Fits(AttentionShape shape, int length) => Shape with { Window = 0 } == shape with { Window = 0 } && length <= Capacity;

    /// <summary>Query positions per block: about <see cref="RowsPerBlock"/> rows with all of a group's heads.</summary>
    public static int BlockPositionsFor(AttentionShape shape) =>
        Math.Max(1, RowsPerBlock / (shape.Heads / shape.KeyValueHeads));

    /// <summary>The bytes one scratch takes for sequences of up to <paramref name="capacity"/> positions.</summary>
    public static long BytesFor(AttentionShape shape, int capacity)
    {
        (long keys, long values, long queries, long scores, long outputs) = Lengths(shape, capacity);
        return (keys + values + queries + scores + outputs) * sizeof(float);
    }

    /// <summary>
    /// The floats of each array: 64-key panels of every head column, 64-column value panels of every position, and a
    /// block's query rows (padded to <see cref="RowMultiple"/>) with their scores over every key panel and their outputs.
    /// </summary>
    private static (long Keys, long Values, long Queries, long Scores, long Outputs) Lengths(AttentionShape shape, int capacity)
    {
        long keyPanels = (capacity + W - 1) / W, valuePanels = (shape.HeadWidth + W - 1) / W;
        long rows = (BlockPositionsFor(shape) * (shape.Heads / shape.KeyValueHeads) + RowMultiple - 1) / RowMultiple * RowMultiple;
        return (keyPanels * shape.HeadWidth * W, valuePanels * capacity * W, rows * shape.HeadWidth, rows * keyPanels * W, rows * valuePanels * W);
    }
}
