using Assay.Features;
using Assay.Input;

namespace Assay.Output;

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
