namespace Assay.Output;

/// <summary>
/// Shard <see cref="Index"/> of <see cref="Count"/> of an extraction: the accepted rows whose 0-based index i in the
/// input (counting accepted records only, in input order) has i mod Count = Index − 1, and, in shard 1 only, every
/// rejected record. Each row belongs to exactly one shard, and a shard's rows do not depend on the machine, the thread
/// count or the token budget, so <see cref="RunMerge"/> can put the shards' folders back together byte for byte.
/// </summary>
public sealed record RunShard
{
    /// <summary>Creates shard <paramref name="index"/> (1-based) of <paramref name="count"/>.</summary>
    /// <exception cref="ArgumentOutOfRangeException">Not 1 ≤ index ≤ count, or count under 2.</exception>
    public RunShard(int index, int count)
    {
        if (count < 2 || index < 1 || index > count)
        {
            throw new ArgumentOutOfRangeException(nameof(index), $"shard {index}/{count}: expected 1 ≤ k ≤ n with n ≥ 2 (n = 1 is an unsharded run)");
        }
        Index = index;
        Count = count;
    }

    /// <summary>Which shard, 1 … <see cref="Count"/>.</summary>
    public int Index { get; }

    /// <summary>How many shards the extraction is split into.</summary>
    public int Count { get; }

    /// <summary>Whether the accepted row with 0-based input index <paramref name="row"/> belongs to this shard.</summary>
    public bool Holds(long row) => row % Count == Index - 1;

    /// <summary>How many of <paramref name="rows"/> accepted rows belong to this shard.</summary>
    public long RowsOf(long rows) => rows < Index ? 0 : ((rows - Index) / Count) + 1;

    /// <summary>"k/n".</summary>
    public override string ToString() => string.Create(System.Globalization.CultureInfo.InvariantCulture, $"{Index}/{Count}");
}
