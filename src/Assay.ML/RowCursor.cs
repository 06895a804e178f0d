using Microsoft.ML;
using Microsoft.ML.Data;

namespace Assay.ML;

/// <summary>The cursor of both Assay data views: getters over a <see cref="RowSource"/>.</summary>
internal sealed class RowCursor : DataViewRowCursor
{
    private readonly RowSource _source;
    private readonly IReadOnlyList<ViewColumn> _columns;
    private readonly bool[] _active;
    private long _position = -1;
    private bool _done;

    public RowCursor(DataViewSchema schema, IReadOnlyList<ViewColumn> columns, RowSource source, IEnumerable<DataViewSchema.Column> columnsNeeded)
    {
        Schema = schema;
        _columns = columns;
        _source = source;
        _active = new bool[columns.Count];
        foreach (DataViewSchema.Column c in columnsNeeded)
        {
            _active[c.Index] = true;
        }
    }

    public override DataViewSchema Schema { get; }

    public override long Position => _position;

    public override long Batch => 0;

    public override bool IsColumnActive(DataViewSchema.Column column) => _active[column.Index];

    public override bool MoveNext()
    {
        if (_done || !_source.MoveNext())
        {
            _done = true;
            return false;
        }
        _position++;
        return true;
    }

    public override ValueGetter<DataViewRowId> GetIdGetter() =>
        (ref DataViewRowId id) => id = new DataViewRowId((ulong)Current()._source.RowIndex, 0);

    public override ValueGetter<TValue> GetGetter<TValue>(DataViewSchema.Column column)
    {
        if (!_active[column.Index])
        {
            throw new InvalidOperationException($"column \"{column.Name}\" was not asked for when the cursor was made");
        }
        ViewColumn c = _columns[column.Index];
        Delegate getter = c.Kind switch
        {
            ColumnKind.Text => (ValueGetter<ReadOnlyMemory<char>>)((ref ReadOnlyMemory<char> value) => value = Current()._source.Text(c.Slot).AsMemory()),
            ColumnKind.Floats => (ValueGetter<VBuffer<float>>)((ref VBuffer<float> value) => Fill(Current()._source.Floats(c.Slot), ref value)),
            _ => (ValueGetter<VBuffer<int>>)((ref VBuffer<int> value) => Fill(Current()._source.Ints(c.Slot), ref value)),
        };
        return getter as ValueGetter<TValue>
            ?? throw new InvalidOperationException($"column \"{c.Name}\" holds {c.Type}: read it as {Spelled(getter.GetType().GetGenericArguments()[0])}, not {Spelled(typeof(TValue))}");
    }

    protected override void Dispose(bool disposing)
    {
        if (disposing)
        {
            _source.Dispose();
        }
        base.Dispose(disposing);
    }

    private static string Spelled(Type t) => t.IsGenericType
        ? $"{t.Name[..t.Name.IndexOf('`', StringComparison.Ordinal)]}<{string.Join(", ", t.GetGenericArguments().Select(Spelled))}>"
        : t.Name;

    private RowCursor Current() => _position >= 0 && !_done
        ? this
        : throw new InvalidOperationException("the cursor is not on a row: call MoveNext first (and only read while it returns true)");

    private static void Fill<T>(ReadOnlySpan<T> values, ref VBuffer<T> destination)
    {
        VBufferEditor<T> editor = VBufferEditor.Create(ref destination, values.Length);
        values.CopyTo(editor.Values);
        destination = editor.Commit();
    }
}
