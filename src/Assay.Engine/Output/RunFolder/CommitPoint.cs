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

    /// <summary>Reads progress.json of <paramref name="folder"/>, every field checked.</summary>
    /// <exception cref="RunFolderException">The file is not JSON, or a field is missing, of the wrong kind, negative or
    /// inconsistent with the others.</exception>
    public static CommitPoint Load(string folder)
    {
        JsonObject o;
        try
        {
            o = JsonInput.TryParseNode(InputFile.ReadAllBytes(Path.Combine(folder, RunFolder.ProgressFile)), 64, out string problem) switch
            {
                JsonObject parsed => parsed,
                null => throw new JsonException(problem),
                _ => throw new JsonException("not a JSON object"),
            };
        }
        catch (JsonException e)
        {
            throw Damaged(folder, $"is not JSON ({e.Message})");
        }
        long Count(string name)
        {
            try
            {
                long value = o[name]?.GetValue<long>() ?? throw Damaged(folder, $"has no \"{name}\"");
                return value >= 0 ? value : throw Damaged(folder, $"\"{name}\" is {value}, a negative count");
            }
            catch (Exception e) when (e is InvalidOperationException or FormatException)
            {
                throw Damaged(folder, $"\"{name}\" is {Cut(o[name]!.ToJsonString())}, not a count");
            }
        }
        var state = new CommitPoint
        {
            Settings = o["settings"] is JsonObject settings ? (JsonObject)settings.DeepClone() : throw Damaged(folder, "has no \"settings\" object"),
            Read = Count("read"),
            Accepted = Count("accepted"),
            Rejected = Count("rejected"),
            TruncatedRows = Count("truncated_rows"),
            Tokens = Count("tokens"),
            RowsBytes = Count("rows_bytes"),
            RejectsBytes = Count("rejects_bytes"),
            Sessions = o["sessions"] is JsonArray sessions ? (JsonArray)sessions.DeepClone() : throw Damaged(folder, "has no \"sessions\" array"),
        };
        if (state.Accepted + state.Rejected > state.Read || state.TruncatedRows > state.Accepted)
        {
            throw Damaged(folder, string.Create(System.Globalization.CultureInfo.InvariantCulture,
                $"counts do not add up (read {state.Read}, accepted {state.Accepted}, rejected {state.Rejected}, truncated rows {state.TruncatedRows})"));
        }
        return state;
    }

    private static RunFolderException Damaged(string folder, string problem) =>
        new(folder, $"{RunFolder.ProgressFile} {problem}: the folder was changed since it was written; start over with --overwrite");

    private static string Cut(string value) => value.Length <= 60 ? value : value[..60] + "…";

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
