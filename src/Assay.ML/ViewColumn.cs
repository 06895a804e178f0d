using Microsoft.ML;
using Microsoft.ML.Data;

namespace Assay.ML;

/// <summary>What a column of an Assay data view holds.</summary>
internal enum ColumnKind
{
    /// <summary>Text: a row's id, label or input text.</summary>
    Text,

    /// <summary>A fixed-width vector of float32 (hidden states, distributions, Φp, log-likelihoods).</summary>
    Floats,

    /// <summary>A fixed-width vector of int32 (token ids of top-k features).</summary>
    Ints,
}

/// <summary>One column: its name, what it holds, the slot its values come from in the row source, and its width.</summary>
internal sealed record ViewColumn(string Name, ColumnKind Kind, int Slot, int Width)
{
    public DataViewType Type => Kind switch
    {
        ColumnKind.Text => TextDataViewType.Instance,
        ColumnKind.Floats => new VectorDataViewType(NumberDataViewType.Single, Width),
        _ => new VectorDataViewType(NumberDataViewType.Int32, Width),
    };

    public static DataViewSchema Schema(IReadOnlyList<ViewColumn> columns)
    {
        var builder = new DataViewSchema.Builder();
        foreach (ViewColumn c in columns)
        {
            builder.AddColumn(c.Name, c.Type);
        }
        return builder.ToSchema();
    }

    /// <summary>Refuses two columns of one name: ML.NET would hide the first.</summary>
    public static void CheckUnique(IReadOnlyList<ViewColumn> columns, string source)
    {
        foreach (IGrouping<string, ViewColumn> g in columns.GroupBy(c => c.Name, StringComparer.Ordinal).Where(g => g.Count() > 1))
        {
            throw new ArgumentException($"{source}: two columns would be named \"{g.Key}\"; name each feature once");
        }
    }
}

/// <summary>The rows a cursor walks: advanced one at a time, read through the columns' slots.</summary>
internal abstract class RowSource : IDisposable
{
    /// <summary>Moves to the next row; false after the last.</summary>
    public abstract bool MoveNext();

    /// <summary>The row's index in its run or input: the same row has the same index in every cursor.</summary>
    public abstract long RowIndex { get; }

    public abstract string Text(int slot);

    public abstract ReadOnlySpan<float> Floats(int slot);

    public abstract ReadOnlySpan<int> Ints(int slot);

    public virtual void Dispose()
    {
    }
}
