using System.Diagnostics;
using System.Globalization;
using System.Reflection;
using System.Security.Cryptography;
using System.Text.Json;
using System.Text.Json.Nodes;
using Assay.Features;
using Assay.Input;
using Assay.Kernels;
using Assay.Model;
using CsvHelper;

namespace Assay.Output;

/// <summary>
/// One extraction from an input file into a run folder:
/// <list type="bullet">
/// <item>one .npy per feature output (row i = accepted input record i, in input order);</item>
/// <item><c>rows.csv</c>: row, line, id, label, tokens, truncated_tokens;</item>
/// <item><c>rejects.csv</c>: line, reason for each rejected record;</item>
/// <item><c>record.json</c>: what was computed from what (engine version, model files and hashes, input hash,
/// prompt, features, options, counts) — byte-identical for identical runs, resumed or not;</item>
/// <item><c>timing.json</c>: when, how fast and with how much memory each session ran (differs between runs);</item>
/// <item><c>progress.json</c>: only while the run is unfinished — the last commit, from which <c>--resume</c> goes on.</item>
/// </list>
/// Work is committed every <see cref="RunOptions.CommitRows"/> rows: data appended and flushed to disk, .npy headers
/// updated, then progress.json replaced atomically. A run killed at any point loses at most the rows since the last
/// commit; resuming truncates every file to that commit and recomputes the rest, giving the same bytes.
/// </summary>
public static class ExtractionRun
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

    private const int FormatVersion = 1;

    private static readonly JsonSerializerOptions Indented = new() { WriteIndented = true };

    private static readonly CsvWriterOptions CsvOptions = new() { NewLine = "\n" };

    /// <summary>Runs (or resumes) an extraction of <paramref name="inputPath"/> into <paramref name="outputFolder"/>.</summary>
    /// <exception cref="RunFolderException">The folder holds a finished run (and neither Resume nor Overwrite is set),
    /// an unfinished one (without Resume or Overwrite), a run with other settings, or files of something else.</exception>
    /// <exception cref="TextInputException">The input is unusable, or (Strict) a record was rejected.</exception>
    /// <exception cref="OperationCanceledException">Cancelled; the folder holds the last commit and can be resumed.</exception>
    public static RunSummary Execute(LanguageModel model, string inputPath, string outputFolder, RunOptions options,
        IProgress<RunProgress>? progress = null, CancellationToken cancellationToken = default)
    {
        ArgumentNullException.ThrowIfNull(model);
        ArgumentNullException.ThrowIfNull(inputPath);
        ArgumentNullException.ThrowIfNull(outputFolder);
        ArgumentNullException.ThrowIfNull(options);
        if (options.CommitRows < 1)
        {
            throw new ArgumentException($"commit rows {options.CommitRows}: expected a positive number", nameof(options));
        }
        if (options.Resume && options.Overwrite)
        {
            throw new ArgumentException("resume and overwrite exclude each other: resume continues the run in the folder, overwrite replaces it", nameof(options));
        }
        var extractor = new FeatureExtractor(model, options.Extraction);
        using TextInputReader reader = TextInputReader.Open(inputPath, options.Format, options.Fields);
        var outputs = extractor.Outputs.Select(o => new OutputFile(o, options.Precision)).ToArray();
        JsonObject settings = Settings(model, extractor, reader, options, outputs);

        var clock = Stopwatch.StartNew();
        DateTimeOffset started = DateTimeOffset.UtcNow;
        Progress? resumed = PrepareFolder(outputFolder, options, settings);
        if (resumed is { Complete: true })
        {
            return resumed.Summary(alreadyComplete: true, clock.Elapsed);
        }

        var state = resumed ?? new Progress { Settings = settings };
        long resumedAt = state.Rows;
        var session = new JsonObject { ["started"] = Timestamp(started) };
        UpdateSession(session, TimeSpan.Zero, 0, 0);
        state.Sessions.Add(session);

        var files = new RunFiles(outputFolder, outputs, state, fresh: resumed == null);
        try
        {
            if (resumed == null)
            {
                // The data files exist before progress.json does: a folder with neither record nor progress is
                // always safe to start over in.
                WriteProgress(outputFolder, state);
            }
            long sessionTokens = 0;
            var reporter = progress == null ? null : new BatchReporter(progress, state, reader, clock);
            var tracker = new ProgressTracker(reporter);
            using IEnumerator<InputRecord> records = reader.Records().GetEnumerator();
            RunShard? shard = options.Shard;
            bool more = true;
            long inputRows = 0;
            for (long skip = 0; skip < state.Consumed && more; skip++)
            {
                // Records before the last commit were counted then; reading them again only finds where to go on
                // (and, for a shard, the input index of the next accepted row).
                more = records.MoveNext();
                if (more && records.Current.Accepted)
                {
                    inputRows++;
                }
            }
            while (more)
            {
                cancellationToken.ThrowIfCancellationRequested();
                var texts = new List<string>(options.CommitRows);
                var accepted = new List<InputRecord>(options.CommitRows);
                var rowIndices = new List<long>(options.CommitRows);
                var rejected = new List<InputRecord>();
                long read = 0;
                while (accepted.Count < options.CommitRows && (more = records.MoveNext()))
                {
                    read++;
                    InputRecord r = records.Current;
                    if (r.Accepted)
                    {
                        long row = inputRows++;
                        if (shard == null || shard.Holds(row))
                        {
                            accepted.Add(r);
                            rowIndices.Add(row);
                            texts.Add(r.Text!);
                        }
                    }
                    else if (options.Strict)
                    {
                        throw new TextInputException(reader.Path, r.Line, $"{r.Rejection} (stopped by --strict; without it the record goes to {RejectsFile} and the run goes on)");
                    }
                    else if (shard == null || shard.Index == 1)
                    {
                        rejected.Add(r);
                    }
                }
                if (read == 0)
                {
                    break;
                }
                reporter?.StartGroup(read, rejected.Count);

                FeatureRow[] rows = texts.Count == 0 ? [] : extractor.ExtractGroup(texts, state.Rows, tracker, cancellationToken);
                cancellationToken.ThrowIfCancellationRequested();
                files.Append(rows, accepted, rowIndices, rejected);
                state.Consumed += read;
                state.Rows += accepted.Count;
                state.Rejected += rejected.Count;
                state.TruncatedRows += rows.Count(r => r.TruncatedTokens > 0);
                state.Tokens += rows.Sum(r => (long)r.TokenCount);
                sessionTokens = tracker.Tokens;
                UpdateSession(session, clock.Elapsed, state.Rows - resumedAt, sessionTokens);
                files.Commit(state);
                WriteProgress(outputFolder, state);
                reporter?.StartGroup(0, 0);
                progress?.Report(new RunProgress(state.Rows, state.Consumed, state.Rejected, sessionTokens,
                    reader.TotalBytes == 0 ? 1 : Math.Min(1.0, (double)reader.BytesRead / reader.TotalBytes), clock.Elapsed));
            }

            UpdateSession(session, clock.Elapsed, state.Rows - resumedAt, sessionTokens);
            files.Dispose();
            Finish(outputFolder, state, outputs, shard == null ? null : new JsonObject
            {
                ["index"] = shard.Index,
                ["count"] = shard.Count,
                ["input_rows"] = inputRows,
            });
            return state.Summary(alreadyComplete: false, clock.Elapsed) with { ResumedAt = resumedAt };
        }
        finally
        {
            files.Dispose();
        }
    }

    /// <summary>What a folder holds: nothing, a finished run, an unfinished one, or something else.</summary>
    private static Progress? PrepareFolder(string folder, RunOptions options, JsonObject settings)
    {
        Directory.CreateDirectory(folder);
        string progressPath = Path.Combine(folder, ProgressFile);
        string recordPath = Path.Combine(folder, RecordFile);
        string[] present = Directory.GetFiles(folder).Select(Path.GetFileName).ToArray()!;
        bool ours(string name) => name is RecordFile or ProgressFile or TimingFile or RowsFile or RejectsFile or RunMerge.MergeFile
            || name.EndsWith(".npy", StringComparison.Ordinal) || name.EndsWith(".tmp", StringComparison.Ordinal);
        string[] foreign = present.Where(n => !ours(n)).ToArray();
        if (foreign.Length > 0 || Directory.GetDirectories(folder).Length > 0)
        {
            throw new RunFolderException(folder, $"holds files that are not part of a run ({string.Join(", ", foreign.Take(3).DefaultIfEmpty("a subfolder"))}); give an empty or new folder");
        }

        if (File.Exists(progressPath) && !options.Overwrite)
        {
            if (!options.Resume)
            {
                throw new RunFolderException(folder, "holds an unfinished run; pass --resume to continue it or --overwrite to start over");
            }
            Progress state = Progress.Load(progressPath);
            string? difference = FirstDifference(state.Settings, settings);
            if (difference != null)
            {
                throw new RunFolderException(folder, $"the unfinished run there was started with a different {difference}; rerun with the same options to resume, or pass --overwrite to start over");
            }
            return state;
        }
        if (File.Exists(recordPath) && !options.Overwrite)
        {
            if (!options.Resume)
            {
                throw new RunFolderException(folder, "holds a finished run, which is never overwritten unless asked; pass --overwrite to replace it");
            }
            JsonObject record = (JsonObject)JsonNode.Parse(File.ReadAllBytes(recordPath))!;
            string? difference = FirstDifference((JsonObject)record["settings"]!, settings);
            if (difference != null)
            {
                throw new RunFolderException(folder, $"holds a finished run made with a different {difference}; pass --overwrite to replace it");
            }
            return Progress.FromRecord(record);
        }

        foreach (string name in present)
        {
            File.Delete(Path.Combine(folder, name));
        }
        return null;
    }

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

    /// <summary>Everything that decides the output bytes: a run can only be resumed with the same.</summary>
    private static JsonObject Settings(LanguageModel model, FeatureExtractor extractor, TextInputReader reader,
        RunOptions options, OutputFile[] outputs)
    {
        ExtractionOptions x = options.Extraction;
        var modelFiles = new JsonArray();
        foreach (ModelFile f in ModelFile.Describe(model.Folder))
        {
            modelFiles.Add(new JsonObject { ["name"] = f.Name, ["bytes"] = f.Bytes, ["sha256"] = f.Sha256 });
        }
        var features = new JsonArray();
        foreach (FeatureRequest r in x.Features)
        {
            var feature = new JsonObject { ["spec"] = r.Spec };
            switch (r)
            {
                case WordListFeature w:
                    feature["words"] = new JsonArray([.. w.Words.Select(s => JsonValue.Create(s))]);
                    break;
                case CompletionFeature c:
                    feature["candidates"] = new JsonArray([.. c.Candidates.Select(s => JsonValue.Create(s))]);
                    break;
                default:
                    break;
            }
            features.Add(feature);
        }
        var files = new JsonArray();
        foreach (OutputFile o in outputs)
        {
            files.Add(new JsonObject { ["file"] = o.FileName, ["dtype"] = o.Descr, ["width"] = o.Output.Width });
        }
        string version = typeof(ExtractionRun).Assembly.GetCustomAttribute<AssemblyInformationalVersionAttribute>()?.InformationalVersion ?? "unknown";
        var settings = new JsonObject
        {
            ["format_version"] = FormatVersion,
            ["engine_version"] = version,
            ["kernels"] = KernelSelector.Current.ToString(),
            ["model"] = new JsonObject
            {
                ["folder"] = Path.GetFileName(Path.TrimEndingDirectorySeparator(Path.GetFullPath(model.Folder))),
                ["layers"] = model.Config.Layers,
                ["width"] = model.Config.Width,
                ["vocabulary"] = model.Config.VocabularySize,
                ["context"] = model.Config.ContextLength,
                ["tokenizer"] = Path.GetFileName(model.Tokenizer.Source),
                ["weights"] = model.Precision switch
                {
                    WeightPrecision.BFloat16 => "bfloat16",
                    WeightPrecision.Integer8 => "int8",
                    _ => "float32",
                },
                ["files"] = modelFiles,
            },
            ["input"] = new JsonObject
            {
                ["file"] = Path.GetFileName(reader.Path),
                ["bytes"] = reader.TotalBytes,
                ["sha256"] = Sha256(reader.Path),
                ["format"] = reader.Format.ToString(),
                ["text_field"] = options.Fields.Text,
                ["id_field"] = options.Fields.Id,
                ["label_field"] = options.Fields.Label,
                ["id_required"] = options.Fields.IdRequired,
                ["label_required"] = options.Fields.LabelRequired,
            },
            ["prompt"] = x.Prompt.Source,
            ["prompt_tokens"] = extractor.PromptTokens,
            ["text_token_limit"] = extractor.TextTokenLimit,
            ["truncation"] = x.Truncation == TextTruncation.KeepHead ? "keep-head" : "keep-tail",
            ["leading_space"] = x.LeadingSpace,
            ["features"] = features,
            ["precision"] = options.Precision == FeaturePrecision.Binary16 ? "float16" : "float32",
            ["outputs"] = files,
            ["strict"] = options.Strict,
        };
        if (options.Shard is { } shard)
        {
            settings["shard"] = new JsonObject { ["index"] = shard.Index, ["count"] = shard.Count };
        }
        return settings;
    }

    private static void Finish(string folder, Progress state, OutputFile[] outputs, JsonObject? shard)
    {
        JsonObject record = Record(state.Settings, new RunCounts(state.Consumed, state.Rows, state.Rejected, state.TruncatedRows, state.Tokens),
            outputs.Select(o => (o.FileName, o.Descr, o.Output.Width)));
        if (shard != null)
        {
            record["shard"] = shard;
        }
        WriteAtomically(Path.Combine(folder, RecordFile), record);

        double seconds = state.Sessions.Sum(s => s!["seconds"]!.GetValue<double>());
        var timing = new JsonObject
        {
            ["sessions"] = state.Sessions.DeepClone(),
            ["seconds"] = Math.Round(seconds, 3),
            ["rows_per_second"] = seconds > 0 ? Math.Round(state.Rows / seconds, 2) : 0,
            ["tokens_per_second"] = seconds > 0 ? Math.Round(state.Tokens / seconds, 1) : 0,
            ["peak_rss_bytes"] = Process.GetCurrentProcess().PeakWorkingSet64,
        };
        WriteAtomically(Path.Combine(folder, TimingFile), timing);
        File.Delete(Path.Combine(folder, ProgressFile));
    }

    /// <summary>A finished run's record.json: the settings, the counts and each file's shape.</summary>
    internal static JsonObject Record(JsonObject settings, RunCounts counts, IEnumerable<(string File, string DType, int Width)> files)
    {
        var shapes = new JsonArray();
        foreach ((string file, string dtype, int width) in files)
        {
            shapes.Add(new JsonObject
            {
                ["file"] = file,
                ["dtype"] = dtype,
                ["shape"] = new JsonArray(counts.Accepted, width),
            });
        }
        return new JsonObject
        {
            ["settings"] = settings.DeepClone(),
            ["counts"] = new JsonObject
            {
                ["read"] = counts.Read,
                ["accepted"] = counts.Accepted,
                ["rejected"] = counts.Rejected,
                ["truncated_rows"] = counts.TruncatedRows,
                ["tokens"] = counts.Tokens,
            },
            ["files"] = shapes,
        };
    }

    private static void UpdateSession(JsonObject session, TimeSpan elapsed, long rows, long tokens)
    {
        session["ended"] = Timestamp(DateTimeOffset.UtcNow);
        session["seconds"] = Math.Round(elapsed.TotalSeconds, 3);
        session["rows"] = rows;
        session["tokens"] = tokens;
        session["rows_per_second"] = elapsed.TotalSeconds > 0 ? Math.Round(rows / elapsed.TotalSeconds, 2) : 0;
        session["tokens_per_second"] = elapsed.TotalSeconds > 0 ? Math.Round(tokens / elapsed.TotalSeconds, 1) : 0;
        session["peak_rss_bytes"] = Process.GetCurrentProcess().PeakWorkingSet64;
    }

    private static string Timestamp(DateTimeOffset t) => t.ToString("yyyy-MM-ddTHH:mm:ss.fffZ", CultureInfo.InvariantCulture);

    private static void WriteProgress(string folder, Progress state) => WriteAtomically(Path.Combine(folder, ProgressFile), state.ToJson());

    /// <summary>Writes a JSON file by way of a temporary file and a rename, so a reader sees the old or the new file whole.</summary>
    internal static void WriteAtomically(string path, JsonNode node)
    {
        string temporary = path + ".tmp";
        using (var file = new FileStream(temporary, FileMode.Create, FileAccess.Write))
        {
            using (var writer = new Utf8JsonWriter(file, new JsonWriterOptions { Indented = true }))
            {
                node.WriteTo(writer, Indented);
            }
            file.WriteByte((byte)'\n');
            file.Flush(flushToDisk: true);
        }
        File.Move(temporary, path, overwrite: true);
    }

    private static string Sha256(string path)
    {
        using FileStream file = File.OpenRead(path);
        return Convert.ToHexStringLower(SHA256.HashData(file));
    }

    /// <summary>Turns the extractor's per-batch counts into run progress.</summary>
    private sealed class BatchReporter(IProgress<RunProgress> progress, Progress state, TextInputReader reader, Stopwatch clock)
        : IProgress<ExtractionProgress>
    {
        private readonly long _rowsBefore = state.Rows;
        private long _groupRecords, _groupRejected;

        /// <summary>Counts the records of the group being computed, which the state only holds once it is committed.</summary>
        public void StartGroup(long records, long rejected)
        {
            _groupRecords = records;
            _groupRejected = rejected;
        }

        public void Report(ExtractionProgress value) =>
            progress.Report(new RunProgress(_rowsBefore + value.Rows, state.Consumed + _groupRecords, state.Rejected + _groupRejected, value.Tokens,
                reader.TotalBytes == 0 ? 1 : Math.Min(1.0, (double)reader.BytesRead / reader.TotalBytes), clock.Elapsed));
    }

    /// <summary>An output array and how it is stored.</summary>
    private sealed class OutputFile(FeatureOutput output, FeaturePrecision precision)
    {
        public FeatureOutput Output { get; } = output;

        public bool Half { get; } = output.Element == FeatureElement.Real && precision == FeaturePrecision.Binary16;

        public string Descr => Output.Element == FeatureElement.TokenId ? "<i4" : Half ? "<f2" : "<f4";

        public int ElementBytes => Half ? 2 : 4;

        public string FileName => Output.Name + ".npy";
    }

    /// <summary>The open files of a run, appended to and committed together.</summary>
    private sealed class RunFiles : IDisposable
    {
        private readonly NpyAppender[] _arrays;
        private readonly OutputFile[] _outputs;
        private readonly FileStream _rows;
        private readonly FileStream _rejects;
        private bool _disposed;

        public RunFiles(string folder, OutputFile[] outputs, Progress state, bool fresh)
        {
            _outputs = outputs;
            _arrays = new NpyAppender[outputs.Length];
            for (int i = 0; i < outputs.Length; i++)
            {
                string path = Path.Combine(folder, outputs[i].FileName);
                _arrays[i] = fresh
                    ? NpyAppender.Create(path, outputs[i].Descr, outputs[i].Output.Width, outputs[i].ElementBytes)
                    : NpyAppender.Reopen(path, outputs[i].Descr, outputs[i].Output.Width, outputs[i].ElementBytes, state.Rows);
            }
            _rows = OpenTable(Path.Combine(folder, RowsFile), fresh, state.RowsBytes, ["row", "line", "id", "label", "tokens", "truncated_tokens"]);
            _rejects = OpenTable(Path.Combine(folder, RejectsFile), fresh, state.RejectsBytes, ["line", "reason"]);
            if (fresh)
            {
                state.RowsBytes = _rows.Length;
                state.RejectsBytes = _rejects.Length;
                Commit(state);
            }
        }

        public void Append(FeatureRow[] rows, List<InputRecord> accepted, List<long> rowIndices, List<InputRecord> rejected)
        {
            for (int o = 0; o < _outputs.Length; o++)
            {
                OutputFile output = _outputs[o];
                byte[] block = new byte[(long)rows.Length * _arrays[o].RowBytes];
                for (int i = 0; i < rows.Length; i++)
                {
                    Span<byte> dst = block.AsSpan(i * _arrays[o].RowBytes, _arrays[o].RowBytes);
                    if (output.Output.Element == FeatureElement.TokenId)
                    {
                        WriteLittleEndian(rows[i].TokenIds(o), dst);
                    }
                    else if (output.Half)
                    {
                        WriteHalves(rows[i].Values(o), dst);
                    }
                    else
                    {
                        WriteLittleEndian(rows[i].Values(o), dst);
                    }
                }
                _arrays[o].Append(block);
            }

            AppendTable(_rows, w =>
            {
                for (int i = 0; i < rows.Length; i++)
                {
                    InputRecord r = accepted[i];
                    w.WriteField(rowIndices[i], default);
                    w.WriteField(r.Line, default);
                    w.WriteField(r.Id);
                    w.WriteField(r.Label);
                    w.WriteField(rows[i].TokenCount, default);
                    w.WriteField(rows[i].TruncatedTokens, default);
                    w.EndRecord();
                }
            });
            AppendTable(_rejects, w =>
            {
                foreach (InputRecord r in rejected)
                {
                    w.WriteField(r.Line, default);
                    w.WriteField(r.Rejection);
                    w.EndRecord();
                }
            });
        }

        public void Commit(Progress state)
        {
            foreach (NpyAppender a in _arrays)
            {
                a.Commit(state.Rows);
            }
            _rows.Flush(flushToDisk: true);
            _rejects.Flush(flushToDisk: true);
            state.RowsBytes = _rows.Length;
            state.RejectsBytes = _rejects.Length;
        }

        public void Dispose()
        {
            if (_disposed)
            {
                return;
            }
            _disposed = true;
            foreach (NpyAppender a in _arrays)
            {
                a?.Dispose();
            }
            _rows?.Dispose();
            _rejects?.Dispose();
        }

        private static FileStream OpenTable(string path, bool fresh, long committedBytes, string[] header)
        {
            if (fresh)
            {
                var created = new FileStream(path, FileMode.Create, FileAccess.ReadWrite, FileShare.Read);
                AppendTable(created, w =>
                {
                    foreach (string h in header)
                    {
                        w.WriteField(h);
                    }
                    w.EndRecord();
                });
                return created;
            }
            var file = new FileStream(path, FileMode.Open, FileAccess.ReadWrite, FileShare.Read);
            if (file.Length < committedBytes)
            {
                file.Dispose();
                throw new IOException($"{path} is shorter than its last commit: the run folder was changed since it was written. Start over with --overwrite.");
            }
            file.SetLength(committedBytes);
            file.Seek(0, SeekOrigin.End);
            return file;
        }

        private static void AppendTable(FileStream file, Action<CsvWriter> write)
        {
            using var buffer = new MemoryStream();
            using (CsvWriter w = CsvWriter.Create(buffer, CsvOptions, leaveOpen: true))
            {
                write(w);
            }
            buffer.WriteTo(file);
        }

        private static void WriteLittleEndian<T>(ReadOnlySpan<T> values, Span<byte> destination) where T : unmanaged
        {
            Debug.Assert(BitConverter.IsLittleEndian);
            System.Runtime.InteropServices.MemoryMarshal.AsBytes(values).CopyTo(destination);
        }

        private static void WriteHalves(ReadOnlySpan<float> values, Span<byte> destination)
        {
            Span<Half> halves = System.Runtime.InteropServices.MemoryMarshal.Cast<byte, Half>(destination);
            System.Numerics.Tensors.TensorPrimitives.ConvertToHalf(values, halves);
        }
    }

    /// <summary>The state of a run at its last commit.</summary>
    private sealed class Progress
    {
        public required JsonObject Settings { get; init; }

        public long Consumed { get; set; }

        public long Rows { get; set; }

        public long Rejected { get; set; }

        public long TruncatedRows { get; set; }

        public long Tokens { get; set; }

        public long RowsBytes { get; set; }

        public long RejectsBytes { get; set; }

        public JsonArray Sessions { get; init; } = [];

        public bool Complete { get; init; }

        public static Progress Load(string path)
        {
            JsonObject o;
            try
            {
                o = (JsonObject)JsonNode.Parse(File.ReadAllBytes(path))!;
            }
            catch (Exception e) when (e is JsonException or InvalidCastException or NullReferenceException)
            {
                throw new RunFolderException(Path.GetDirectoryName(path)!, $"{ProgressFile} is unreadable ({e.Message}); pass --overwrite to start over");
            }
            return new Progress
            {
                Settings = (JsonObject)o["settings"]!.DeepClone(),
                Consumed = o["consumed_records"]!.GetValue<long>(),
                Rows = o["rows"]!.GetValue<long>(),
                Rejected = o["rejected"]!.GetValue<long>(),
                TruncatedRows = o["truncated_rows"]!.GetValue<long>(),
                Tokens = o["tokens"]!.GetValue<long>(),
                RowsBytes = o["rows_bytes"]!.GetValue<long>(),
                RejectsBytes = o["rejects_bytes"]!.GetValue<long>(),
                Sessions = (JsonArray)o["sessions"]!.DeepClone(),
            };
        }

        public static Progress FromRecord(JsonObject record)
        {
            RunCounts counts = RunCounts.FromRecord(record["counts"]!);
            return new Progress
            {
                Settings = (JsonObject)record["settings"]!.DeepClone(),
                Consumed = counts.Read,
                Rows = counts.Accepted,
                Rejected = counts.Rejected,
                TruncatedRows = counts.TruncatedRows,
                Tokens = counts.Tokens,
                Complete = true,
            };
        }

        public JsonObject ToJson() => new()
        {
            ["settings"] = Settings.DeepClone(),
            ["consumed_records"] = Consumed,
            ["rows"] = Rows,
            ["rejected"] = Rejected,
            ["truncated_rows"] = TruncatedRows,
            ["tokens"] = Tokens,
            ["rows_bytes"] = RowsBytes,
            ["rejects_bytes"] = RejectsBytes,
            ["sessions"] = Sessions.DeepClone(),
        };

        public RunSummary Summary(bool alreadyComplete, TimeSpan elapsed) =>
            new(Consumed, Rows, Rejected, TruncatedRows, Tokens, 0, alreadyComplete, elapsed);
    }
}
