namespace Assay.Output;

/// <summary>How far a run has come.</summary>
/// <param name="Accepted">Accepted rows whose features are computed (this session and before it).</param>
/// <param name="Read">Records read from the input so far.</param>
/// <param name="Rejected">Records rejected so far.</param>
/// <param name="Tokens">Tokens run through the model in this session.</param>
/// <param name="InputFraction">Share of the input file's bytes read, 0 … 1; null for a pipe, whose size is not known.</param>
/// <param name="Elapsed">Time since this session started.</param>
public readonly record struct RunProgress(long Accepted, long Read, long Rejected, long Tokens, double? InputFraction, TimeSpan Elapsed);
