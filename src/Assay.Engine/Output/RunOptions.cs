using Assay.Features;
using Assay.Input;

namespace Assay.Output;

/// <summary>How floating features are stored on disk.</summary>
public enum FeaturePrecision
{
    /// <summary>IEEE float32 (NumPy &lt;f4), exactly the values computed.</summary>
    Binary32,

    /// <summary>IEEE float16 (NumPy &lt;f2), rounded to nearest: half the disk, about 3 significant digits.</summary>
    Binary16,
}

/// <summary>What a run reads, computes and writes, and what it does with a folder that already holds a run.</summary>
public sealed record RunOptions
{
    /// <summary>Prompt, features and batching.</summary>
    public ExtractionOptions Extraction { get; init; } = new();

    /// <summary>The input format (Auto: from the file name).</summary>
    public InputFormat Format { get; init; } = InputFormat.Auto;

    /// <summary>Field names of JSONL, CSV and TSV input.</summary>
    public InputFields Fields { get; init; } = new();

    /// <summary>Storage of floating features.</summary>
    public FeaturePrecision Precision { get; init; } = FeaturePrecision.Binary32;

    /// <summary>Continue an interrupted run in the folder (a finished one is left as it is).</summary>
    public bool Resume { get; init; }

    /// <summary>Replace a run already in the folder, finished or not.</summary>
    public bool Overwrite { get; init; }

    /// <summary>Stop at the first rejected record instead of writing it to the rejects file.</summary>
    public bool Strict { get; init; }

    /// <summary>Accepted rows per commit: the most work a crash can lose, and the window rows are length-sorted in.</summary>
    public int CommitRows { get; init; } = FeatureExtractor.GroupRows;

    /// <summary>Process only one shard of the accepted rows (null: all of them); see <see cref="RunShard"/>.</summary>
    public RunShard? Shard { get; init; }
}

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

/// <summary>How far a run has come.</summary>
/// <param name="Rows">Accepted rows whose features are computed (this session and before it).</param>
/// <param name="Read">Records read from the input so far.</param>
/// <param name="Rejected">Records rejected so far.</param>
/// <param name="Tokens">Tokens run through the model in this session.</param>
/// <param name="InputFraction">Share of the input file's bytes read, 0 … 1.</param>
/// <param name="Elapsed">Time since this session started.</param>
public readonly record struct RunProgress(long Rows, long Read, long Rejected, long Tokens, double InputFraction, TimeSpan Elapsed);

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

/// <summary>The output folder holds something a run must not touch or cannot continue; the message says what to pass.</summary>
public sealed class RunFolderException : InvalidInputException
{
    /// <summary>Creates the exception.</summary>
    public RunFolderException(string folder, string problem)
        : base(folder, $"{folder}: {problem}")
    {
    }
}
