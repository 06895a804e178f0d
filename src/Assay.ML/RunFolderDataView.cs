using Assay.Output;
using Microsoft.ML;

namespace Assay.ML;

/// <summary>
/// A finished run folder as an ML.NET <see cref="IDataView"/>: the columns <c>Id</c> and <c>Label</c> (text, from
/// rows.csv; the label is empty where the input had none), then one vector column per feature file, named by its file
/// stem (<c>hidden.layer4.last</c>, <c>cmean</c>, <c>topk10.ids</c>): float32 for real features (float16 files
/// widen exactly), int32 for token ids. The features are read whole into memory at load, each file checked against
/// the SHA-256 its run recorded; rows keep the run's order, and the view can be shuffled.
/// </summary>
public sealed class RunFolderDataView : IDataView
{
    private readonly IReadOnlyList<ViewColumn> _columns;
    private readonly string[] _ids;
    private readonly string[] _labels;
    private readonly float[][] _floats;
    private readonly int[][] _ints;
    private readonly int _rows;

    private RunFolderDataView(string folder, IReadOnlyList<ViewColumn> columns, string[] ids, string[] labels, float[][] floats, int[][] ints)
    {
        Folder = folder;
        _columns = columns;
        _ids = ids;
        _labels = labels;
        _floats = floats;
        _ints = ints;
        _rows = ids.Length;
        Schema = ViewColumn.Schema(columns);
    }

    /// <summary>Name of the column of row ids.</summary>
    public const string IdColumn = "Id";

    /// <summary>Name of the column of labels.</summary>
    public const string LabelColumn = "Label";

    /// <summary>The run folder the view was loaded from.</summary>
    public string Folder { get; }

    /// <summary>Loads a finished run folder's features.</summary>
    /// <param name="runFolder">A run folder <c>assay extract</c> (or <see cref="ExtractionRun"/>) finished.</param>
    /// <param name="features">Features to include, as a file stem or a feature spelling (<c>cmean</c>, <c>hidden:4</c>); none: every feature file of the run.</param>
    /// <exception cref="RunFolderException">The run is unfinished, a feature is missing (the message lists what the run holds), or a file changed since its run finished.</exception>
    public static RunFolderDataView Load(string runFolder, params IReadOnlyList<string> features)
    {
        ArgumentNullException.ThrowIfNull(runFolder);
        ArgumentNullException.ThrowIfNull(features);
        if (!File.Exists(Path.Combine(runFolder, RunFolder.RecordFile)))
        {
            throw new RunFolderException(runFolder, $"holds no finished run ({RunFolder.RecordFile} is missing); finish it with assay extract --resume");
        }
        RunRecord record = RunRecord.Read(runFolder);
        IReadOnlyList<string> stems = features.Count == 0
            ? [.. record.Files.Select(f => Path.GetFileNameWithoutExtension(f.File))]
            : [.. features.Select(f => RunFeatures.Resolve(runFolder, f))];
        if (stems.Count == 0)
        {
            throw new RunFolderException(runFolder, "holds no feature files");
        }

        var columns = new List<ViewColumn> { new(IdColumn, ColumnKind.Text, 0, 0), new(LabelColumn, ColumnKind.Text, 1, 0) };
        var floats = new List<float[]>();
        var ints = new List<int[]>();
        string[] ids = [], labels = [];
        foreach (string stem in stems)
        {
            RunFeatures f = RunFeatures.Load(runFolder, stem);
            bool tokenIds = record.Files.Single(o => o.File == stem + ".npy").DType == "<i4";
            if (tokenIds)
            {
                columns.Add(new ViewColumn(stem, ColumnKind.Ints, ints.Count, f.Width));
                ints.Add([.. f.Values.Select(v => (int)v)]);
            }
            else
            {
                columns.Add(new ViewColumn(stem, ColumnKind.Floats, floats.Count, f.Width));
                floats.Add([.. f.Values.Select(v => (float)v)]);
            }
            // Every feature's load checks rows.csv against its file; the ids and labels are the same each time.
            ids = [.. f.Ids];
            labels = [.. f.Labels];
        }
        ViewColumn.CheckUnique(columns, runFolder);
        return new RunFolderDataView(runFolder, columns, ids, labels, [.. floats], [.. ints]);
    }

    /// <inheritdoc/>
    public bool CanShuffle => true;

    /// <inheritdoc/>
    public DataViewSchema Schema { get; }

    /// <inheritdoc/>
    public long? GetRowCount() => _rows;

    /// <inheritdoc/>
    public DataViewRowCursor GetRowCursor(IEnumerable<DataViewSchema.Column> columnsNeeded, Random? rand = null)
    {
        int[] order = [.. Enumerable.Range(0, _rows)];
        rand?.Shuffle(order);
        return new RowCursor(Schema, _columns, new Rows(this, order), columnsNeeded);
    }

    /// <inheritdoc/>
    public DataViewRowCursor[] GetRowCursorSet(IEnumerable<DataViewSchema.Column> columnsNeeded, int n, Random? rand = null) =>
        [GetRowCursor(columnsNeeded, rand)];

    private sealed class Rows(RunFolderDataView view, int[] order) : RowSource
    {
        private int _at = -1;
        private int Row => order[_at];

        public override bool MoveNext() => ++_at < order.Length;

        public override long RowIndex => Row;

        public override string Text(int slot) => slot == 0 ? view._ids[Row] : view._labels[Row];

        public override ReadOnlySpan<float> Floats(int slot) => RowOf(view._floats[slot]);

        public override ReadOnlySpan<int> Ints(int slot) => RowOf(view._ints[slot]);

        // Every array holds rows × width values (fewer than 2³¹), so its width is its length over the row count.
        private ReadOnlySpan<T> RowOf<T>(T[] values)
        {
            int width = values.Length / view._rows;
            return values.AsSpan(Row * width, width);
        }
    }
}
