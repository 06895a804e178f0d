namespace Assay.Output;

/// <summary>
/// What a run will write, estimated before it starts: the records of the input (its lines, less a CSV/TSV header;
/// a quoted field over several lines makes this an overestimate), the share a shard takes, and the feature bytes a
/// row takes, so a user sees "about 6.6 GB" before the disk does.
/// </summary>
/// <param name="Rows">Rows the run (or shard) will write, at most.</param>
/// <param name="BytesPerRow">Bytes of every .npy file together for one row.</param>
/// <param name="LargestOutput">The output that takes most of a row, and its bytes a row.</param>
public sealed record RunEstimate(long Rows, long BytesPerRow, (string Name, long Bytes) LargestOutput)
{
    /// <summary>Feature bytes the run will write, at most.</summary>
    public long Bytes => Rows * BytesPerRow;
}
