using Assay.Features;
using Assay.Input;

namespace Assay.Output;

/// <summary>
/// What a run reads, computes and writes, and what it does with a folder that already holds a run. Checked as it is
/// built: an invalid value or combination throws from its initializer.
/// </summary>
public sealed record RunOptions
{
    /// <summary>Prompt, features and batching.</summary>
    public ExtractionOptions Extraction { get; init => field = value ?? throw new ArgumentNullException(nameof(Extraction)); } = new();

    /// <summary>The input format (Auto: from the file name).</summary>
    public InputFormat Format { get; init; } = InputFormat.Auto;

    /// <summary>Field names of JSONL, CSV and TSV input.</summary>
    public InputFields Fields { get; init => field = value ?? throw new ArgumentNullException(nameof(Fields)); } = new();

    /// <summary>Storage of floating features.</summary>
    public FeaturePrecision Precision { get; init; } = FeaturePrecision.Binary32;

    /// <summary>Continue an interrupted run in the folder (a finished one is left as it is).</summary>
    /// <exception cref="ArgumentException">Set together with <see cref="Overwrite"/>.</exception>
    public bool Resume { get; init => field = !(value && Overwrite) ? value : throw ResumeWithOverwrite(); }

    /// <summary>Replace a run already in the folder, finished or not.</summary>
    /// <exception cref="ArgumentException">Set together with <see cref="Resume"/>.</exception>
    public bool Overwrite { get; init => field = !(value && Resume) ? value : throw ResumeWithOverwrite(); }

    /// <summary>Stop at the first rejected record instead of writing it to the rejects file.</summary>
    public bool Strict { get; init; }

    /// <summary>Accepted rows per commit, at least 1: the most work a crash can lose, and the window rows are length-sorted in.</summary>
    /// <exception cref="ArgumentOutOfRangeException">Less than 1.</exception>
    public int CommitRows
    {
        get;
        init => field = value >= 1 ? value : throw new ArgumentOutOfRangeException(nameof(CommitRows), value, "expected a positive number of rows");
    } = FeatureExtractor.GroupRows;

    /// <summary>Process only one shard of the accepted rows (null: all of them); see <see cref="RunShard"/>.</summary>
    public RunShard? Shard { get; init; }

    private static ArgumentException ResumeWithOverwrite() =>
        new("resume and overwrite exclude each other: resume continues the run in the folder, overwrite replaces it");
}
