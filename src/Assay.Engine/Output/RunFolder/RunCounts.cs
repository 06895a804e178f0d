namespace Assay.Output;

/// <summary>A run's counts: records read, rows written, records rejected, rows truncated, and tokens of all rows.</summary>
public readonly record struct RunCounts(long Read, long Accepted, long Rejected, long TruncatedRows, long Tokens);
