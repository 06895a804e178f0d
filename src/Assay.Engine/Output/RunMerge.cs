using System.Globalization;
using System.Security.Cryptography;
using System.Text;
using System.Text.Json;
using System.Text.Json.Nodes;
using CsvHelper;

namespace Assay.Output;

/// <summary>What a merge wrote.</summary>
/// <param name="Shards">Shard folders merged.</param>
/// <param name="Rows">Rows of the merged run.</param>
/// <param name="Rejected">Rejected records (all of them in shard 1).</param>
/// <param name="Files">Feature files written.</param>
public sealed record MergeSummary(int Shards, long Rows, long Rejected, int Files);

/// <summary>
/// Puts the run folders of one extraction's shards (<see cref="RunOptions.Shard"/>) back together into one run folder
/// whose .npy files, rows.csv, rejects.csv and record.json are byte-identical to those of a single run of the same
/// extraction; <see cref="RunFolder.MergeFile"/> says it was merged and from which folders. Everything is checked before anything
/// is written — the shards share every setting (model files and hashes, input file and hash, prompt, features, options),
/// all n are present exactly once, each is finished and its files are whole — and the folder appears only complete
/// (it is written beside the target and renamed).
/// </summary>
public static class RunMerge
{
    private const int RowBlockBytes = 4 << 20;

    /// <summary>Merges <paramref name="shardFolders"/> (in any order) into <paramref name="outputFolder"/>.</summary>
    /// <exception cref="RunFolderException">A shard folder is missing, unfinished, unsharded, of another extraction,
    /// given twice or damaged; a shard is missing; or the output folder is not new or empty. Nothing is written then.</exception>
    public static MergeSummary Merge(IReadOnlyList<string> shardFolders, string outputFolder, IProgress<long>? progress = null)
    {
        ArgumentNullException.ThrowIfNull(shardFolders);
        ArgumentNullException.ThrowIfNull(outputFolder);
        if (shardFolders.Count == 0)
        {
            throw new ArgumentException("no shard folders to merge", nameof(shardFolders));
        }
        outputFolder = Path.TrimEndingDirectorySeparator(Path.GetFullPath(outputFolder));
        FolderLock.RefuseFile(outputFolder);
        bool existed = Directory.Exists(outputFolder);
        if (existed && Directory.EnumerateFileSystemEntries(outputFolder).Any(e => !FolderLock.IsLockFile(Path.GetFileName(e))))
        {
            throw new RunFolderException(outputFolder, "already holds files; the merge writes a new or empty folder");
        }

        ShardRun[] shards = Check(shardFolders.Select(ShardRun.Load).ToArray(), outputFolder);
        ShardRun first = shards[0];
        long rows = first.InputRows;

        // One merge writes the folder (and its staging folder beside it) at a time. The files are made in the staging
        // folder, then moved in, record.json last: the folder is a finished run only once everything is there.
        FolderLock folderLock = FolderLock.Acquire(outputFolder);
        string staging = outputFolder + ".merging";
        try
        {
            if (Directory.EnumerateFileSystemEntries(outputFolder).Any(e => !FolderLock.IsLockFile(Path.GetFileName(e))))
            {
                throw new RunFolderException(outputFolder, "already holds files; the merge writes a new or empty folder");
            }
            if (Directory.Exists(staging))
            {
                Directory.Delete(staging, recursive: true);
            }
            Directory.CreateDirectory(staging);
            long done = 0;
            foreach ((string file, string dtype, int width) in first.Files)
            {
                MergeArray(shards, file, dtype, width, rows, Path.Combine(staging, file), progress, done);
                done += rows;
            }
            MergeRowTable(shards, rows, Path.Combine(staging, RunFolder.RowsFile));
            File.Copy(Path.Combine(first.Folder, RunFolder.RejectsFile), Path.Combine(staging, RunFolder.RejectsFile));

            var counts = new RunCounts(first.Read, rows, first.Rejected, shards.Sum(s => s.Counts.TruncatedRows), shards.Sum(s => s.Counts.Tokens));
            RunRecord.Create(staging, first.Settings, counts, first.Files).Write(staging);
            AtomicFile.WriteJson(Path.Combine(staging, RunFolder.MergeFile), Provenance(shards));

            foreach (string file in Directory.GetFiles(staging).Select(f => Path.GetFileName(f)).OrderBy(n => n == RunFolder.RecordFile))
            {
                File.Move(Path.Combine(staging, file), Path.Combine(outputFolder, file));
            }
            Directory.Delete(staging);
            folderLock.Dispose();
        }
        catch
        {
            if (Directory.Exists(staging))
            {
                Directory.Delete(staging, recursive: true);
            }
            folderLock.Dispose();
            if (!existed && Directory.Exists(outputFolder) && !Directory.EnumerateFileSystemEntries(outputFolder).Any())
            {
                Directory.Delete(outputFolder);
            }
            throw;
        }
        return new MergeSummary(shards.Length, rows, first.Rejected, first.Files.Length);
    }

    /// <summary>The shards, in shard order, once they are known to belong together and to be complete.</summary>
    private static ShardRun[] Check(ShardRun[] given, string outputFolder)
    {
        ShardRun first = given[0];
        int count = first.Count;
        var byIndex = new ShardRun?[count];
        foreach (ShardRun s in given)
        {
            if (s.Count != count)
            {
                throw new RunFolderException(s.Folder, $"is shard {s.Index}/{s.Count}, but {first.Folder} is one of {count} shards: they are not shards of one extraction");
            }
            string? difference = RunRecord.FirstDifference(first.Settings, s.Settings);
            if (difference != null)
            {
                throw new RunFolderException(s.Folder, $"was made with a different {difference} than {first.Folder}: shards of one extraction share the model, input, prompt, features and options");
            }
            if (byIndex[s.Index - 1] is { } other)
            {
                throw new RunFolderException(s.Folder, $"holds shard {s.Index}/{count}, and so does {other.Folder}: give each shard once");
            }
            byIndex[s.Index - 1] = s;
        }
        int[] missing = Enumerable.Range(1, count).Where(k => byIndex[k - 1] == null).ToArray();
        if (missing.Length > 0)
        {
            throw new RunFolderException(outputFolder, $"cannot merge: shard{(missing.Length > 1 ? "s" : "")} {string.Join(", ", missing.Select(k => $"{k}/{count}"))} missing; give the folders of all {count} shards");
        }

        ShardRun[] shards = byIndex!;
        foreach (ShardRun s in shards)
        {
            var shard = new RunShard(s.Index, count);
            if (s.InputRows != first.InputRows || s.Read != first.Read)
            {
                throw new RunFolderException(s.Folder, string.Create(CultureInfo.InvariantCulture,
                    $"read {s.Read} records with {s.InputRows} accepted, but {first.Folder} read {first.Read} with {first.InputRows}: the shard folders were changed"));
            }
            if (s.Accepted != shard.RowsOf(s.InputRows) || (s.Index > 1 && s.Rejected != 0))
            {
                throw new RunFolderException(s.Folder, string.Create(CultureInfo.InvariantCulture,
                    $"holds {s.Accepted} rows and {s.Rejected} rejects; shard {shard} of {s.InputRows} accepted rows holds {shard.RowsOf(s.InputRows)} rows{(s.Index > 1 ? " and no rejects" : "")}"));
            }
            foreach ((string file, string dtype, int width) in s.Files)
            {
                string path = Path.Combine(s.Folder, file);
                long expected = NpyFormat.HeaderBytes + (s.Accepted * width * ElementBytes(path, dtype));
                long actual = File.Exists(path) ? InputFile.Length(path) : -1;
                if (actual != expected)
                {
                    throw new RunFolderException(s.Folder, string.Create(CultureInfo.InvariantCulture,
                        $"{file} is {(actual < 0 ? "missing" : $"{actual} bytes")}; its record says {s.Accepted} rows of {width} {dtype}, {expected} bytes: the shard folder was changed"));
                }
            }
            foreach (string table in new[] { RunFolder.RowsFile, RunFolder.RejectsFile })
            {
                if (!File.Exists(Path.Combine(s.Folder, table)))
                {
                    throw new RunFolderException(s.Folder, $"{table} is missing: the shard folder was changed");
                }
            }
        }
        return shards;
    }

    private static int ElementBytes(string path, string dtype) => NpyFormat.ElementBytes(dtype) is int bytes and > 0 ? bytes
        : throw new RunFolderException(Path.GetDirectoryName(path)!, $"{Path.GetFileName(path)} has dtype '{dtype}' in its record; expected {NpyFormat.Float32}, {NpyFormat.Float16} or {NpyFormat.Int32}");

    /// <summary>Row i of the merged array is row i div n of shard (i mod n) + 1.</summary>
    private static void MergeArray(ShardRun[] shards, string file, string dtype, int width, long rows, string target,
        IProgress<long>? progress, long before)
    {
        int rowBytes = width * ElementBytes(target, dtype);
        var sources = new FileStream[shards.Length];
        try
        {
            for (int s = 0; s < shards.Length; s++)
            {
                sources[s] = InputFile.OpenRead(Path.Combine(shards[s].Folder, file), 1 << 20, FileOptions.SequentialScan);
                sources[s].Seek(NpyFormat.HeaderBytes, SeekOrigin.Begin);
            }
            using NpyAppender merged = NpyAppender.Create(target, dtype, width);
            int blockRows = Math.Max(1, RowBlockBytes / Math.Max(1, rowBytes));
            byte[] block = new byte[(long)blockRows * rowBytes];
            for (long start = 0; start < rows; start += blockRows)
            {
                int n = (int)Math.Min(blockRows, rows - start);
                for (int i = 0; i < n; i++)
                {
                    sources[(start + i) % shards.Length].ReadExactly(block, i * rowBytes, rowBytes);
                }
                merged.Append(block.AsSpan(0, n * rowBytes));
                progress?.Report(before + start + n);
            }
            merged.Commit(rows);
        }
        finally
        {
            foreach (FileStream? f in sources)
            {
                f?.Dispose();
            }
        }
    }

    /// <summary>Interleaves the shards' rows.csv records as they are written (raw bytes), checking each row number.</summary>
    private static void MergeRowTable(ShardRun[] shards, long rows, string target)
    {
        var readers = new CsvReader[shards.Length];
        var streams = new FileStream[shards.Length];
        try
        {
            byte[]? header = null;
            for (int s = 0; s < shards.Length; s++)
            {
                string path = Path.Combine(shards[s].Folder, RunFolder.RowsFile);
                streams[s] = InputFile.OpenRead(path);
                byte[] h = HeaderLine(streams[s]);
                readers[s] = CsvReader.Create(streams[s], new CsvReaderOptions { HasHeader = false, MaxRecordSize = 4 << 20 }, leaveOpen: true);
                if (header != null && !header.AsSpan().SequenceEqual(h))
                {
                    throw new RunFolderException(shards[s].Folder, $"{RunFolder.RowsFile} has another header than {shards[0].Folder}'s");
                }
                header = h;
            }
            using var output = new BufferedStream(new FileStream(target, FileMode.CreateNew, FileAccess.Write), 1 << 20);
            output.Write(header);
            for (long i = 0; i < rows; i++)
            {
                int s = (int)(i % shards.Length);
                CsvReader r = readers[s];
                string expected = i.ToString(CultureInfo.InvariantCulture);
                if (!r.Read() || r.GetString(0) != expected)
                {
                    throw new RunFolderException(shards[s].Folder, $"{RunFolder.RowsFile} does not list row {expected} where shard {s + 1}/{shards.Length} must: the shard folder was changed");
                }
                output.Write(r.RawRecord);
                output.WriteByte((byte)'\n');
            }
            for (int s = 0; s < shards.Length; s++)
            {
                if (readers[s].Read())
                {
                    throw new RunFolderException(shards[s].Folder, $"{RunFolder.RowsFile} has more rows than its record: the shard folder was changed");
                }
            }
        }
        finally
        {
            foreach (CsvReader? r in readers)
            {
                r?.Dispose();
            }
            foreach (FileStream? f in streams)
            {
                f?.Dispose();
            }
        }
    }

    /// <summary>The table's first line, with its line break (the header: plain column names, never quoted).</summary>
    private static byte[] HeaderLine(FileStream file)
    {
        var line = new List<byte>(64);
        int b;
        while ((b = file.ReadByte()) >= 0)
        {
            line.Add((byte)b);
            if (b == '\n')
            {
                break;
            }
        }
        return [.. line];
    }

    private static JsonObject Provenance(ShardRun[] shards)
    {
        var list = new JsonArray();
        foreach (ShardRun s in shards)
        {
            list.Add(new JsonObject
            {
                ["shard"] = $"{s.Index}/{s.Count}",
                ["folder"] = s.Folder,
                ["rows"] = s.Accepted,
                ["record_sha256"] = s.RecordSha256,
                ["seconds"] = s.Seconds,
            });
        }
        return new JsonObject
        {
            ["merged_at"] = DateTimeOffset.UtcNow.ToString("yyyy-MM-ddTHH:mm:ss.fffZ", CultureInfo.InvariantCulture),
            ["shards"] = list,
        };
    }

    /// <summary>A finished shard's folder and record.</summary>
    private sealed class ShardRun
    {
        public required string Folder { get; init; }

        /// <summary>The settings without the shard entry: what all shards of one extraction share.</summary>
        public required JsonObject Settings { get; init; }

        public required int Index { get; init; }

        public required int Count { get; init; }

        public required long InputRows { get; init; }

        public required RunCounts Counts { get; init; }

        public long Read => Counts.Read;

        public long Accepted => Counts.Accepted;

        public long Rejected => Counts.Rejected;

        public required (string File, string DType, int Width)[] Files { get; init; }

        public required string RecordSha256 { get; init; }

        public double? Seconds { get; init; }

        public static ShardRun Load(string folder)
        {
            folder = Path.TrimEndingDirectorySeparator(Path.GetFullPath(folder));
            if (!Directory.Exists(folder))
            {
                throw new RunFolderException(folder, "no such shard folder");
            }
            if (File.Exists(Path.Combine(folder, RunFolder.ProgressFile)))
            {
                throw new RunFolderException(folder, $"holds an unfinished shard ({RunFolder.ProgressFile} is there); finish it by rerunning its assay extract command with --resume, then merge");
            }
            RunRecord record = RunRecord.Read(folder);
            var settings = (JsonObject)record.Settings.DeepClone();
            if (settings["shard"] is null || record.Shard is not { } shard)
            {
                throw new RunFolderException(folder, "holds an unsharded run; only the folders of assay extract --shard k/n runs are merged");
            }
            if (record.FirstDamagedFile(folder) is string damaged)
            {
                throw new RunFolderException(folder, $"{damaged}: the shard folder was changed since its run finished; extract that shard again");
            }
            settings.Remove("shard");
            return new ShardRun
            {
                Folder = folder,
                Settings = settings,
                Index = shard.Index,
                Count = shard.Count,
                InputRows = record.ShardInputRows,
                Counts = record.Counts,
                Files = [.. record.Files.Select(f => (f.File, f.DType, f.Width))],
                RecordSha256 = record.Sha256,
                Seconds = ReadSeconds(Path.Combine(folder, RunFolder.TimingFile)),
            };
        }

        private static double? ReadSeconds(string timingPath)
        {
            if (!File.Exists(timingPath))
            {
                return null;
            }
            try
            {
                return JsonNode.Parse(InputFile.ReadAllBytes(timingPath))?["seconds"]?.GetValue<double>();
            }
            catch (Exception e) when (e is JsonException or InvalidOperationException or FormatException)
            {
                return null;
            }
        }
    }
}
