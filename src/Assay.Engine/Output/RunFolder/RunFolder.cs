namespace Assay.Output;

/// <summary>
/// The layout of a run folder and who may write in it:
/// <list type="bullet">
/// <item>one .npy per feature output (row i = accepted input record i, in input order);</item>
/// <item><see cref="RowsFile"/>: row, line, id, label, tokens, truncated_tokens; <see cref="RejectsFile"/>: line, reason;</item>
/// <item><see cref="RecordFile"/> (<see cref="RunRecord"/>): what was computed from what — byte-identical for identical runs;</item>
/// <item><see cref="TimingFile"/>: when, how fast and with how much memory each session ran (differs between runs);</item>
/// <item><see cref="ProgressFile"/>: only while the run is unfinished — the last commit, from which a resume goes on;</item>
/// <item><see cref="MergeFile"/>: in a merged folder, where its shards came from.</item>
/// </list>
/// A folder holding anything else is never written to, and one writer at a time writes it (<see cref="FolderLock"/>).
/// </summary>
public static class RunFolder
{
    /// <summary>The record of a finished run.</summary>
    public const string RecordFile = "record.json";

    /// <summary>The commit point of an unfinished run.</summary>
    public const string ProgressFile = "progress.json";

    /// <summary>Sessions, times, throughput and peak memory.</summary>
    public const string TimingFile = "timing.json";

    /// <summary>The row table.</summary>
    public const string RowsFile = "rows.csv";

    /// <summary>The rejected records.</summary>
    public const string RejectsFile = "rejects.csv";

    /// <summary>A merged folder's provenance: when, and from which shard folders (whose records' hashes it gives).</summary>
    public const string MergeFile = "merge.json";

    /// <summary>Whether a file of this name belongs in a run folder.</summary>
    internal static bool IsRunFile(string name) =>
        name is RecordFile or ProgressFile or TimingFile or RowsFile or RejectsFile or MergeFile
        || name.EndsWith(".npy", StringComparison.Ordinal) || name.EndsWith(AtomicFile.TemporarySuffix, StringComparison.Ordinal);

    /// <summary>
    /// Takes a folder for a run with <paramref name="settings"/>: a new or empty folder, or one of a run's files only
    /// (cleared when it holds neither record nor progress, or when <paramref name="overwrite"/>), gives a fresh start
    /// (null); an unfinished run with the same settings gives its last commit when <paramref name="resume"/>; a
    /// finished one with the same settings gives its complete state when <paramref name="resume"/>.
    /// </summary>
    /// <exception cref="RunFolderException">Foreign files; a run there without resume or overwrite; a run with other settings.</exception>
    internal static CommitPoint? Claim(string folder, bool resume, bool overwrite, System.Text.Json.Nodes.JsonObject settings)
    {
        Directory.CreateDirectory(folder);
        string[] present = [.. Directory.GetFiles(folder).Select(f => Path.GetFileName(f)).Where(n => !FolderLock.IsLockFile(n))];
        string[] foreign = [.. present.Where(n => !IsRunFile(n))];
        if (foreign.Length > 0 || Directory.GetDirectories(folder).Length > 0)
        {
            throw new RunFolderException(folder, $"holds files that are not part of a run ({string.Join(", ", foreign.Take(3).DefaultIfEmpty("a subfolder"))}); give an empty or new folder");
        }

        if (File.Exists(Path.Combine(folder, ProgressFile)) && !overwrite)
        {
            if (!resume)
            {
                throw new RunFolderException(folder, "holds an unfinished run; pass --resume to continue it or --overwrite to start over");
            }
            CommitPoint state = CommitPoint.Load(folder);
            string? difference = RunRecord.FirstDifference(state.Settings, settings);
            if (difference != null)
            {
                throw new RunFolderException(folder, $"the unfinished run there was started with a different {difference}; rerun with the same options to resume, or pass --overwrite to start over");
            }
            return state;
        }
        if (File.Exists(Path.Combine(folder, RecordFile)) && !overwrite)
        {
            if (!resume)
            {
                throw new RunFolderException(folder, "holds a finished run, which is never overwritten unless asked; pass --overwrite to replace it");
            }
            RunRecord record = RunRecord.Read(folder);
            string? difference = RunRecord.FirstDifference(record.Settings, settings);
            if (difference != null)
            {
                throw new RunFolderException(folder, $"holds a finished run made with a different {difference}; pass --overwrite to replace it");
            }
            return CommitPoint.Finished(record);
        }

        foreach (string name in present)
        {
            File.Delete(Path.Combine(folder, name));
        }
        return null;
    }
}
