using Assay.Features;
using Microsoft.ML;

namespace Assay.ML;

/// <summary>
/// A feature extractor over a sequence of texts as an ML.NET <see cref="IDataView"/>, computed as it is read: the
/// columns <c>Text</c> and, when labels are given, <c>Label</c>, then one vector column per output of the extractor
/// (named as its .npy file would be). Nothing is held beyond the extractor's group of texts. Every cursor runs the
/// model over the texts again: a trainer that passes over its data more than once should read a cached copy
/// (<c>mlContext.Data.Cache</c>) or a run folder (<see cref="RunFolderDataView"/>).
/// </summary>
public sealed class ExtractionDataView : IDataView
{
    private readonly FeatureExtractor _extractor;
    private readonly IEnumerable<string> _texts;
    private readonly IEnumerable<string>? _labels;
    private readonly IReadOnlyList<ViewColumn> _columns;

    /// <summary>Name of the column of input texts.</summary>
    public const string TextColumn = "Text";

    /// <summary>Name of the column of labels.</summary>
    public const string LabelColumn = RunFolderDataView.LabelColumn;

    /// <summary>A view of <paramref name="extractor"/>'s features of <paramref name="texts"/>.</summary>
    /// <param name="extractor">The extractor: model, prompt and features.</param>
    /// <param name="texts">The texts; enumerated once per cursor, so it must give the same texts each time.</param>
    /// <param name="labels">One label per text, in the same order (null: no label column).</param>
    public ExtractionDataView(FeatureExtractor extractor, IEnumerable<string> texts, IEnumerable<string>? labels = null)
    {
        ArgumentNullException.ThrowIfNull(extractor);
        ArgumentNullException.ThrowIfNull(texts);
        _extractor = extractor;
        _texts = texts;
        _labels = labels;
        var columns = new List<ViewColumn> { new(TextColumn, ColumnKind.Text, 0, 0) };
        if (labels != null)
        {
            columns.Add(new ViewColumn(LabelColumn, ColumnKind.Text, 1, 0));
        }
        for (int i = 0; i < extractor.Outputs.Count; i++)
        {
            FeatureOutput o = extractor.Outputs[i];
            columns.Add(new ViewColumn(o.Name, o.Element == FeatureElement.TokenId ? ColumnKind.Ints : ColumnKind.Floats, i, o.Width));
        }
        ViewColumn.CheckUnique(columns, "the extractor's outputs");
        _columns = columns;
        Schema = ViewColumn.Schema(columns);
    }

    /// <inheritdoc/>
    public bool CanShuffle => false;

    /// <inheritdoc/>
    public DataViewSchema Schema { get; }

    /// <inheritdoc/>
    public long? GetRowCount() => _texts.TryGetNonEnumeratedCount(out int count) ? count : null;

    /// <inheritdoc/>
    public DataViewRowCursor GetRowCursor(IEnumerable<DataViewSchema.Column> columnsNeeded, Random? rand = null) =>
        new RowCursor(Schema, _columns, new Rows(this), columnsNeeded);

    /// <inheritdoc/>
    public DataViewRowCursor[] GetRowCursorSet(IEnumerable<DataViewSchema.Column> columnsNeeded, int n, Random? rand = null) =>
        [GetRowCursor(columnsNeeded, rand)];

    /// <summary>
    /// Rows as the extractor yields them (in input order). The texts it has read but not yet given back wait in a
    /// queue with their labels, so each row's text and label are known without holding the whole input.
    /// </summary>
    private sealed class Rows : RowSource
    {
        private readonly Queue<(string Text, string? Label)> _pending = new();
        private readonly IEnumerator<FeatureRow> _rows;
        private (string Text, string? Label) _current;
        private FeatureRow? _row;

        public Rows(ExtractionDataView view)
        {
            _rows = view._extractor.Extract(Remember(view._texts, view._labels)).GetEnumerator();
        }

        private IEnumerable<string> Remember(IEnumerable<string> texts, IEnumerable<string>? labels)
        {
            using IEnumerator<string>? label = labels?.GetEnumerator();
            long index = 0;
            foreach (string text in texts)
            {
                string? l = null;
                if (label != null)
                {
                    l = label.MoveNext() ? label.Current : throw new ArgumentException($"labels: {index:N0} labels for more texts; give one label per text");
                }
                _pending.Enqueue((text, l));
                index++;
                yield return text;
            }
            if (label != null && label.MoveNext())
            {
                throw new ArgumentException($"labels: more labels than the {index:N0} texts; give one label per text");
            }
        }

        public override bool MoveNext()
        {
            if (!_rows.MoveNext())
            {
                _row = null;
                return false;
            }
            _row = _rows.Current;
            _current = _pending.Dequeue();
            return true;
        }

        private FeatureRow Row => _row ?? throw new InvalidOperationException("no current row");

        public override long RowIndex => Row.Index;

        public override string Text(int slot) => slot == 0 ? _current.Text : _current.Label ?? "";

        public override ReadOnlySpan<float> Floats(int slot) => Row.Values(slot);

        public override ReadOnlySpan<int> Ints(int slot) => Row.TokenIds(slot);

        public override void Dispose()
        {
            _rows.Dispose();
            base.Dispose();
        }
    }
}
