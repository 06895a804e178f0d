using System.Globalization;
using System.Security.Cryptography;
using System.Text.Json;
using System.Text.Json.Nodes;

namespace Assay.Output;

/// <summary>
/// A finished run's <c>record.json</c>, the one place that writes and reads it: the settings that decide the bytes
/// (model files and hashes, input, prompt, features, options), the counts, each feature file's shape, and for a shard
/// which shard it is. Identical runs give identical records, resumed, sharded and merged or not.
/// </summary>
public sealed class RunRecord
{
    private RunRecord(JsonObject settings, RunCounts counts, IReadOnlyList<RunOutputFile> files, RunShard? shard, long shardInputRows, string sha256,
        IReadOnlyList<(string File, long Bytes, string Sha256)> digests)
    {
        Digests = digests;
        Settings = settings;
        Counts = counts;
        Files = files;
        Shard = shard;
        ShardInputRows = shardInputRows;
        Sha256 = sha256;
    }

    /// <summary>What was computed from what.</summary>
    internal JsonObject Settings { get; }

    /// <summary>The run's counts.</summary>
    public RunCounts Counts { get; }

    /// <summary>The feature files, in output order.</summary>
    public IReadOnlyList<RunOutputFile> Files { get; }

    /// <summary>Which shard of an extraction the folder holds; null for an unsharded (or merged) run.</summary>
    public RunShard? Shard { get; }

    /// <summary>For a shard: the accepted rows of the whole input, of which the shard holds its share.</summary>
    internal long ShardInputRows { get; }

    /// <summary>
    /// Every output file (the feature files, rows.csv, rejects.csv) with its size and SHA-256 when the run finished;
    /// empty in a record written before they were kept.
    /// </summary>
    internal IReadOnlyList<(string File, long Bytes, string Sha256)> Digests { get; }

    /// <summary>SHA-256 of the file's bytes (empty for a record not yet written).</summary>
    internal string Sha256 { get; }

    /// <summary>
    /// The record of a finished run in <paramref name="folder"/> with these settings and counts, and files of these
    /// names, dtypes and widths; every output file there is hashed for it.
    /// </summary>
    internal static RunRecord Create(string folder, JsonObject settings, RunCounts counts, IEnumerable<(string File, string DType, int Width)> files,
        RunShard? shard = null, long shardInputRows = 0)
    {
        RunOutputFile[] outputs = [.. files.Select(f => new RunOutputFile(f.File, f.DType, counts.Accepted, f.Width))];
        var digests = new List<(string, long, string)>();
        foreach (string file in outputs.Select(o => o.File).Append(RunFolder.RowsFile).Append(RunFolder.RejectsFile))
        {
            (long bytes, string sha) = FileDigest.Of(Path.Combine(folder, file));
            digests.Add((file, bytes, sha));
        }
        return new(settings, counts, outputs, shard, shardInputRows, "", digests);
    }

    /// <summary>
    /// The first output file of <paramref name="folder"/> whose size or SHA-256 is not what this record kept (a byte
    /// flipped, a file cut or replaced), as "file: what", or null when all match.
    /// </summary>
    /// <exception cref="RunFolderException">The record keeps no digests (it was written by an earlier version).</exception>
    public string? FirstDamagedFile(string folder)
    {
        ArgumentNullException.ThrowIfNull(folder);
        if (Digests.Count == 0)
        {
            throw new RunFolderException(folder, $"{RunFolder.RecordFile} keeps no file sizes and SHA-256 (written by an earlier assay), so its files cannot be checked; extract it again");
        }
        foreach ((string file, long bytes, string sha) in Digests)
        {
            string path = Path.Combine(folder, file);
            if (!File.Exists(path))
            {
                return $"{file}: missing";
            }
            (long length, string actual) = FileDigest.Of(path);
            if (length != bytes)
            {
                return string.Create(CultureInfo.InvariantCulture, $"{file}: {length:N0} bytes; the record kept {bytes:N0}");
            }
            if (actual != sha)
            {
                return $"{file}: SHA-256 {actual}; the record kept {sha}";
            }
        }
        return null;
    }

    /// <summary>Reads the record of the run in <paramref name="folder"/>.</summary>
    /// <exception cref="RunFolderException">There is no record (no finished run), or it is unreadable.</exception>
    public static RunRecord Read(string folder)
    {
        ArgumentNullException.ThrowIfNull(folder);
        string path = Path.Combine(folder, RunFolder.RecordFile);
        if (!File.Exists(path))
        {
            throw new RunFolderException(folder, $"holds no finished run (no {RunFolder.RecordFile})");
        }
        byte[] bytes = InputFile.ReadAllBytes(path);
        try
        {
            var record = (JsonObject)(JsonInput.TryParseNode(bytes, 64, out string problem) ?? throw new JsonException(problem));
            JsonNode c = record["counts"]!;
            var counts = new RunCounts(c["read"]!.GetValue<long>(), c["accepted"]!.GetValue<long>(), c["rejected"]!.GetValue<long>(),
                c["truncated_rows"]!.GetValue<long>(), c["tokens"]!.GetValue<long>());
            RunOutputFile[] files = [.. record["files"]!.AsArray().Select(f => new RunOutputFile(f!["file"]!.GetValue<string>(),
                f["dtype"]!.GetValue<string>(), f["shape"]![0]!.GetValue<long>(), f["shape"]![1]!.GetValue<int>()))];
            RunShard? shard = null;
            long inputRows = 0;
            if (record["shard"] is JsonObject s)
            {
                int index = s["index"]!.GetValue<int>(), count = s["count"]!.GetValue<int>();
                if (count < 2 || index < 1 || index > count)
                {
                    throw new RunFolderException(folder, string.Create(CultureInfo.InvariantCulture, $"{RunFolder.RecordFile} names shard {index}/{count}, which cannot be"));
                }
                shard = new RunShard(index, count);
                inputRows = s["input_rows"]!.GetValue<long>();
            }
            (string, long, string)[] digests = record["digests"] is JsonArray kept
                ? [.. kept.Select(d => (d!["file"]!.GetValue<string>(), d["bytes"]!.GetValue<long>(), d["sha256"]!.GetValue<string>()))]
                : [];
            return new RunRecord((JsonObject)record["settings"]!.DeepClone(), counts, files, shard, inputRows, Convert.ToHexStringLower(SHA256.HashData(bytes)), digests);
        }
        catch (Exception e) when (e is JsonException or InvalidCastException or InvalidOperationException or NullReferenceException
            or FormatException or IndexOutOfRangeException or ArgumentOutOfRangeException)
        {
            throw new RunFolderException(folder, $"{RunFolder.RecordFile} is unreadable ({e.Message})");
        }
    }

    /// <summary>Writes the record into <paramref name="folder"/> (atomically, flushed to disk).</summary>
    internal void Write(string folder) => AtomicFile.WriteJson(Path.Combine(folder, RunFolder.RecordFile), ToJson());

    /// <summary>record.json: settings, counts, files, and the shard entry of a shard.</summary>
    internal JsonObject ToJson()
    {
        var shapes = new JsonArray();
        foreach (RunOutputFile f in Files)
        {
            shapes.Add(new JsonObject { ["file"] = f.File, ["dtype"] = f.DType, ["shape"] = new JsonArray(f.Rows, f.Width) });
        }
        var record = new JsonObject
        {
            ["settings"] = Settings.DeepClone(),
            ["counts"] = new JsonObject
            {
                ["read"] = Counts.Read,
                ["accepted"] = Counts.Accepted,
                ["rejected"] = Counts.Rejected,
                ["truncated_rows"] = Counts.TruncatedRows,
                ["tokens"] = Counts.Tokens,
            },
            ["files"] = shapes,
            ["digests"] = new JsonArray([.. Digests.Select(d => new JsonObject { ["file"] = d.File, ["bytes"] = d.Bytes, ["sha256"] = d.Sha256 })]),
        };
        if (Shard is { } shard)
        {
            record["shard"] = new JsonObject { ["index"] = shard.Index, ["count"] = shard.Count, ["input_rows"] = ShardInputRows };
        }
        return record;
    }

    /// <summary>
    /// The settings that decide a row's values — model files, prompt, features, storage, engine and kernels — without
    /// those that say which texts were read (the input) and which share of them (the shard), or how rejects were
    /// handled: what two runs must share for one's features to be compared with, or scored by a probe fitted on, the
    /// other's.
    /// </summary>
    public JsonObject ValueSettings()
    {
        var settings = (JsonObject)Settings.DeepClone();
        settings.Remove("input");
        settings.Remove("shard");
        settings.Remove("strict");
        return settings;
    }

    /// <summary>The first value setting in which this run and <paramref name="other"/> differ ("path: this vs other"), or null.</summary>
    public string? FirstValueDifference(RunRecord other)
    {
        ArgumentNullException.ThrowIfNull(other);
        return JsonDifference.First(ValueSettings(), other.ValueSettings());
    }

    /// <summary>The first difference between value settings kept earlier (<see cref="ValueSettings"/>) and this run's, or null.</summary>
    public string? FirstValueDifference(JsonObject valueSettings) => JsonDifference.First(valueSettings, ValueSettings());

    /// <summary>The model's shape as the record names it.</summary>
    internal Features.ModelShape Shape => new(
        Settings["model"]!["layers"]!.GetValue<int>(), Settings["model"]!["width"]!.GetValue<int>(), Settings["model"]!["vocabulary"]!.GetValue<int>());

    /// <summary>The first top-level setting whose value differs, or null when they agree.</summary>
    internal static string? FirstDifference(JsonObject stored, JsonObject current)
    {
        foreach (KeyValuePair<string, JsonNode?> pair in current)
        {
            if (!JsonNode.DeepEquals(pair.Value, stored[pair.Key]))
            {
                return pair.Key.Replace('_', ' ');
            }
        }
        return stored.Count == current.Count ? null : "set of settings";
    }
}
