namespace Assay.Output;

/// <summary>What a run did.</summary>
/// <param name="Read">Records read (accepted + rejected).</param>
/// <param name="Accepted">Rows written.</param>
/// <param name="Rejected">Records written to the rejects file.</param>
/// <param name="TruncatedRows">Rows whose text was cut to fit the context.</param>
/// <param name="Tokens">Tokens of all rows' filled templates.</param>
/// <param name="ResumedAt">Rows already committed when this session started (0 for a fresh run).</param>
/// <param name="AlreadyComplete">The folder held a finished run and nothing was done.</param>
/// <param name="Elapsed">This session's time.</param>
public sealed record RunSummary(long Read, long Accepted, long Rejected, long TruncatedRows, long Tokens, long ResumedAt,
    bool AlreadyComplete, TimeSpan Elapsed);
