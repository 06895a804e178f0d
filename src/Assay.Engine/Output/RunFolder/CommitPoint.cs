using System.Text.Json;
using System.Text.Json.Nodes;

namespace Assay.Output;

/// <summary>The state of a run at its last commit: what progress.json holds (or, for a finished run, its record's counts).</summary>
internal sealed class CommitPoint
{
    public required JsonObject Settings { get; init; }

    /// <summary>Input records read (accepted and rejected) up to the commit.</summary>
    public long Read { get; set; }

    /// <summary>Rows written up to the commit.</summary>
    public long Accepted { get; set; }

    public long Rejected { get; set; }

    public long TruncatedRows { get; set; }

    public long Tokens { get; set; }

    public long RowsBytes { get; set; }

    public long RejectsBytes { get; set; }

    public JsonArray Sessions { get; init; } = [];

    public bool Complete { get; init; }

    /// <summary>Reads progress.json of <paramref name="folder"/>.</summary>
    public static CommitPoint Load(string folder)
    {
        JsonObject o;
        try
        {
            o = (JsonObject)JsonNode.Parse(InputFile.ReadAllBytes(Path.Combine(folder, RunFolder.ProgressFile)))!;
        }
        catch (Exception e) when (e is JsonException or InvalidCastException or NullReferenceException)
        {
            throw new RunFolderException(folder, $"{RunFolder.ProgressFile} is unreadable ({e.Message}); pass --overwrite to start over");
        }
        return new CommitPoint
        {
            Settings = (JsonObject)o["settings"]!.DeepClone(),
            Read = o["read"]!.GetValue<long>(),
            Accepted = o["accepted"]!.GetValue<long>(),
            Rejected = o["rejected"]!.GetValue<long>(),
            TruncatedRows = o["truncated_rows"]!.GetValue<long>(),
            Tokens = o["tokens"]!.GetValue<long>(),
            RowsBytes = o["rows_bytes"]!.GetValue<long>(),
            RejectsBytes = o["rejects_bytes"]!.GetValue<long>(),
            Sessions = (JsonArray)o["sessions"]!.DeepClone(),
        };
    }

    /// <summary>The state of a finished run.</summary>
    public static CommitPoint Finished(RunRecord record)
    {
        RunCounts counts = record.Counts;
        return new CommitPoint
        {
            Settings = (JsonObject)record.Settings.DeepClone(),
            Read = counts.Read,
            Accepted = counts.Accepted,
            Rejected = counts.Rejected,
            TruncatedRows = counts.TruncatedRows,
            Tokens = counts.Tokens,
            Complete = true,
        };
    }

    /// <summary>Replaces progress.json of <paramref name="folder"/> atomically.</summary>
    public void Write(string folder) => AtomicFile.WriteJson(Path.Combine(folder, RunFolder.ProgressFile), ToJson());

    private JsonObject ToJson() => new()
    {
        ["settings"] = Settings.DeepClone(),
        ["read"] = Read,
        ["accepted"] = Accepted,
        ["rejected"] = Rejected,
        ["truncated_rows"] = TruncatedRows,
        ["tokens"] = Tokens,
        ["rows_bytes"] = RowsBytes,
        ["rejects_bytes"] = RejectsBytes,
        ["sessions"] = Sessions.DeepClone(),
    };

    public RunSummary Summary(bool alreadyComplete, TimeSpan elapsed) =>
        new(Read, Accepted, Rejected, TruncatedRows, Tokens, 0, alreadyComplete, elapsed);
}
