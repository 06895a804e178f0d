using System.Diagnostics;
using System.Globalization;
using System.Reflection;
using System.Text.Json;
using System.Text.Json.Nodes;
using Assay.Features;
using Assay.Input;
using Assay.Model;
using CsvHelper;
using Assay.Weights;

namespace Assay.Output;

/// <summary>
/// One extraction from an input file into a run folder (<see cref="RunFolder"/>). Work is committed every
/// <see cref="RunOptions.CommitRows"/> rows: data appended and flushed to disk, .npy headers updated, then
/// progress.json replaced atomically. A run killed at any point loses at most the rows since the last commit;
/// resuming truncates every file to that commit and recomputes the rest, giving the same bytes.
/// </summary>
public static class ExtractionRun
{
    /// <summary>3: record.json keeps every output file's size and SHA-256, and a piped input is marked "stream" (2: values spelled as on the command line, JSON unescaped).</summary>
    private const int FormatVersion = 3;

    /// <summary>
    /// What an extraction of <paramref name="inputPath"/> with <paramref name="options"/> will write (see
    /// <see cref="RunEstimate"/>); null for a pipe, which can be read only once.
    /// </summary>
    /// <exception cref="ArgumentException">The options do not fit the model (as <see cref="Execute"/> would say).</exception>
    public static RunEstimate? Estimate(LanguageModel model, string inputPath, RunOptions options)
    {
        ArgumentNullException.ThrowIfNull(model);
        ArgumentNullException.ThrowIfNull(inputPath);
        ArgumentNullException.ThrowIfNull(options);
        var extractor = new FeatureExtractor(model, options.Extraction);
        OutputFile[] outputs = [.. extractor.Outputs.Select(o => new OutputFile(o, options.Precision))];
        long[] bytes = [.. outputs.Select(o => (long)o.Output.Width * NpyFormat.ElementBytes(o.Descr))];
        int largest = Array.IndexOf(bytes, bytes.Max());
        if (TextInputReader.Check(inputPath))
        {
            return null;   // a pipe: reading it to count its lines would use it up
        }
        long lines = 0;
        bool endsInLineBreak = true;
        using (FileStream file = InputFile.OpenRead(inputPath, 1 << 16, FileOptions.SequentialScan))
        {
            byte[] buffer = new byte[1 << 16];
            int n;
            while ((n = file.Read(buffer)) > 0)
            {
                lines += buffer.AsSpan(0, n).Count((byte)'\n');
                endsInLineBreak = buffer[n - 1] == '\n';
            }
        }
        lines += endsInLineBreak ? 0 : 1;
        InputFormat format = options.Format == InputFormat.Auto ? TextInputReader.FormatOf(inputPath) : options.Format;
        long records = Math.Max(0, lines - (format is InputFormat.Csv or InputFormat.Tsv ? 1 : 0));
        long rows = options.Shard is { } shard ? shard.RowsOf(records) : records;
        return new RunEstimate(rows, bytes.Sum(), (outputs[largest].FileName, bytes[largest]));
    }

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
        var extractor = new FeatureExtractor(model, options.Extraction);
        if (options.Resume && TextInputReader.Check(inputPath))
        {
            // Said before the pipe is opened, which would wait for its writer.
            throw new ArgumentException($"{inputPath} is a pipe, read once: a run from it cannot resume; start it over with --overwrite, or extract from a file", nameof(options));
        }
        using TextInputReader reader = TextInputReader.Open(inputPath, options.Format, options.Fields);
        var outputs = extractor.Outputs.Select(o => new OutputFile(o, options.Precision)).ToArray();
        JsonObject settings = Settings(model, extractor, reader, options, outputs);

        var clock = Stopwatch.StartNew();
        DateTimeOffset started = DateTimeOffset.UtcNow;
        using FolderLock folderLock = FolderLock.Acquire(outputFolder);
        CommitPoint? resumed = RunFolder.Claim(outputFolder, options.Resume, options.Overwrite, settings);
        if (resumed is { Complete: true })
        {
            return resumed.Summary(alreadyComplete: true, clock.Elapsed);
        }

        var state = resumed ?? new CommitPoint { Settings = settings };
        long resumedAt = state.Accepted;
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
                state.Write(outputFolder);
            }
            long sessionTokens = 0;
            var reporter = progress == null ? null : new BatchReporter(progress, state, reader, clock);
            var tracker = new ProgressTracker(reporter);
            using IEnumerator<InputRecord> records = reader.Records().GetEnumerator();
            RunShard? shard = options.Shard;
            bool more = true;
            long inputRows = 0;
            var firstRejections = new List<InputRecord>(3);
            for (long skip = 0; skip < state.Read && more; skip++)
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
                        throw new TextInputException(reader.Path, r.Line, $"{r.Rejection} (stopped by --strict; without it the record goes to {RunFolder.RejectsFile} and the run goes on)");
                    }
                    else
                    {
                        if (firstRejections.Count < 3)
                        {
                            firstRejections.Add(r);
                        }
                        if (shard == null || shard.Index == 1)
                        {
                            rejected.Add(r);
                        }
                    }
                }
                if (read == 0)
                {
                    break;
                }
                reporter?.StartGroup(read, rejected.Count);

                FeatureRow[] rows;
                try
                {
                    rows = texts.Count == 0 ? [] : extractor.ExtractGroup(texts, state.Accepted, tracker, cancellationToken);
                }
                catch (NonFiniteValueException e) when (e.Text is long text)
                {
                    InputRecord record = accepted[(int)(text - state.Accepted)];
                    throw e.InRecord(string.Create(CultureInfo.InvariantCulture, $"{reader.Path} line {record.Line} (id \"{record.Id}\")"));
                }
                cancellationToken.ThrowIfCancellationRequested();
                files.Append(rows, accepted, rowIndices, rejected);
                state.Read += read;
                state.Accepted += accepted.Count;
                state.Rejected += rejected.Count;
                state.TruncatedRows += rows.Count(r => r.TruncatedTokens > 0);
                state.Tokens += rows.Sum(r => (long)r.TokenCount);
                sessionTokens = tracker.Tokens;
                UpdateSession(session, clock.Elapsed, state.Accepted - resumedAt, sessionTokens);
                files.Commit(state);
                state.Write(outputFolder);
                reporter?.StartGroup(0, 0);
                progress?.Report(new RunProgress(state.Accepted, state.Read, state.Rejected, sessionTokens,
                    reader.Fraction, clock.Elapsed));
            }

            UpdateSession(session, clock.Elapsed, state.Accepted - resumedAt, sessionTokens);
            files.Dispose();
            if (inputRows == 0)
            {
                // An empty run is a mistake (a misspelled field, the wrong file), never a finished result: the folder
                // stays unfinished, with the rejects to look at.
                throw NothingAccepted(reader.Path, state, firstRejections, outputFolder);
            }
            if (reader.IsStream)
            {
                JsonObject input = state.Settings["input"]!.AsObject();
                input["bytes"] = reader.TotalBytes;
                input["sha256"] = reader.StreamSha256();
            }
            Finish(outputFolder, state, outputs, shard, inputRows);
            return state.Summary(alreadyComplete: false, clock.Elapsed) with { ResumedAt = resumedAt };
        }
        finally
        {
            files.Dispose();
        }
    }

    /// <summary>Everything that decides the output bytes: a run can only be resumed with the same.</summary>
    /// <summary>The engine's version with the commit it was built from, as record.json names it.</summary>
    internal static string EngineVersion =>
        typeof(ExtractionRun).Assembly.GetCustomAttribute<AssemblyInformationalVersionAttribute>()?.InformationalVersion ?? "unknown";

    private static JsonObject Settings(LanguageModel model, FeatureExtractor extractor, TextInputReader reader,
        RunOptions options, OutputFile[] outputs)
    {
        ExtractionOptions x = options.Extraction;
        var modelFiles = new JsonArray();
        foreach (ModelFile f in model.Files)
        {
            modelFiles.Add(new JsonObject { ["name"] = f.Name, ["bytes"] = f.Bytes, ["sha256"] = f.Sha256 });
        }
        var features = new JsonArray([.. x.Features.Select(r => r.Describe())]);
        var files = new JsonArray();
        foreach (OutputFile o in outputs)
        {
            files.Add(new JsonObject { ["file"] = o.FileName, ["dtype"] = o.Descr, ["width"] = o.Output.Width });
        }
        var settings = new JsonObject
        {
            ["format_version"] = FormatVersion,
            ["engine_version"] = EngineVersion,
            ["kernels"] = LanguageModel.Kernels.ToString(),
            ["model"] = new JsonObject
            {
                ["folder"] = Path.GetFileName(Path.TrimEndingDirectorySeparator(Path.GetFullPath(model.Folder))),
                ["family"] = model.Config.ModelType,
                ["layers"] = model.Config.Layers,
                ["width"] = model.Config.Width,
                ["vocabulary"] = model.Config.VocabularySize,
                ["context"] = model.Config.ContextLength,
                // Every file the ids come from (vocab.json and merges.txt, or tokenizer.json); the embedded encoding by name.
                ["tokenizer"] = model.Tokenizer.Files.Count == 0 ? new JsonArray(model.Tokenizer.Source)
                    : new JsonArray([.. model.Tokenizer.Files.Select(f => JsonValue.Create(Path.GetFileName(f)))]),
                ["weights"] = Spellings.Of(model.Precision),
                ["files"] = modelFiles,
            },
            ["input"] = new JsonObject
            {
                ["file"] = Path.GetFileName(reader.Path),
                // A pipe's size and hash are known only at its end: the record gets them when the run finishes.
                ["bytes"] = reader.IsStream ? null : reader.TotalBytes,
                ["sha256"] = reader.IsStream ? null : FileDigest.Sha256(reader.Path),
                ["stream"] = reader.IsStream,
                ["format"] = Spellings.Of(reader.Format),
                ["text_field"] = options.Fields.Text,
                ["id_field"] = options.Fields.Id,
                ["label_field"] = options.Fields.Label,
                ["id_required"] = options.Fields.IdRequired,
                ["label_required"] = options.Fields.LabelRequired,
            },
            ["prompt"] = x.Prompt.Source,
            ["prompt_tokens"] = extractor.PromptTokens,
            // What the sequences start with: the policy asked for and the token it added, if any.
            ["bos"] = new JsonObject
            {
                ["policy"] = Spellings.Of(x.BeginningOfSequence),
                ["added"] = extractor.StartTokens.Count > 0,
                ["id"] = extractor.StartTokens.Count > 0 ? extractor.StartTokens[0] : null,
                ["token"] = extractor.StartTokens.Count > 0 ? model.Tokenizer.TokenText(extractor.StartTokens[0]) : null,
            },
            ["text_token_limit"] = extractor.TextTokenLimit,
            ["truncation"] = Spellings.Of(x.Truncation),
            ["leading_space"] = x.LeadingSpace,
            ["features"] = features,
            ["precision"] = Spellings.Of(options.Precision),
            ["outputs"] = files,
            ["strict"] = options.Strict,
        };
        if (model.Precision == WeightPrecision.Integer8)
        {
            // The int8 path is part of the kernels of an int8 run (its sums are exact on every path, but say which ran).
            settings.Insert(settings.IndexOf("kernels") + 1, "int8_kernels", LanguageModel.Int8Kernels.ToString());
        }
        if (options.Shard is { } shard)
        {
            settings["shard"] = new JsonObject { ["index"] = shard.Index, ["count"] = shard.Count };
        }
        return settings;
    }

    private static TextInputException NothingAccepted(string input, CommitPoint state, List<InputRecord> first, string folder)
    {
        if (state.Read == 0)
        {
            return new TextInputException(input, 0, "holds no records; nothing to extract");
        }
        string reasons = string.Join("; ", first.Select(r => string.Create(CultureInfo.InvariantCulture, $"line {r.Line}: {r.Rejection}")));
        return new TextInputException(input, 0, string.Create(CultureInfo.InvariantCulture,
            $"no record was accepted ({state.Read:N0} read, all rejected{(reasons.Length > 0 ? $"; first: {reasons}" : "")}); the rejects are in {Path.Combine(folder, RunFolder.RejectsFile)}. Fix the input or the field options and rerun with --overwrite"));
    }

    private static void Finish(string folder, CommitPoint state, OutputFile[] outputs, RunShard? shard, long inputRows)
    {
        RunRecord.Create(folder, state.Settings, new RunCounts(state.Read, state.Accepted, state.Rejected, state.TruncatedRows, state.Tokens),
            outputs.Select(o => (o.FileName, o.Descr, o.Output.Width)), shard, inputRows).Write(folder);

        double seconds = state.Sessions.Sum(s => s!["seconds"]!.GetValue<double>());
        var timing = new JsonObject
        {
            ["sessions"] = state.Sessions.DeepClone(),
            ["seconds"] = Math.Round(seconds, 3),
            ["rows_per_second"] = seconds > 0 ? Math.Round(state.Accepted / seconds, 2) : 0,
            ["tokens_per_second"] = seconds > 0 ? Math.Round(state.Tokens / seconds, 1) : 0,
            ["peak_rss_bytes"] = Process.GetCurrentProcess().PeakWorkingSet64,
        };
        AtomicFile.WriteJson(Path.Combine(folder, RunFolder.TimingFile), timing);
        File.Delete(Path.Combine(folder, RunFolder.ProgressFile));
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

    /// <summary>Turns the extractor's per-batch counts into run progress.</summary>
    private sealed class BatchReporter(IProgress<RunProgress> progress, CommitPoint state, TextInputReader reader, Stopwatch clock)
        : IProgress<ExtractionProgress>
    {
        private readonly long _acceptedBefore = state.Accepted;
        private long _groupRecords, _groupRejected;

        /// <summary>Counts the records of the group being computed, which the state only holds once it is committed.</summary>
        public void StartGroup(long records, long rejected)
        {
            _groupRecords = records;
            _groupRejected = rejected;
        }

        public void Report(ExtractionProgress value) =>
            progress.Report(new RunProgress(_acceptedBefore + value.Rows, state.Read + _groupRecords, state.Rejected + _groupRejected, value.Tokens,
                reader.Fraction, clock.Elapsed));
    }

    /// <summary>An output array and how it is stored.</summary>
    private sealed class OutputFile(FeatureOutput output, FeaturePrecision precision)
    {
        public FeatureOutput Output { get; } = output;

        public bool Half { get; } = output.Element == FeatureElement.Real && precision == FeaturePrecision.Binary16;

        public string Descr => Output.Element == FeatureElement.TokenId ? NpyFormat.Int32 : Half ? NpyFormat.Float16 : NpyFormat.Float32;

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

        public RunFiles(string folder, OutputFile[] outputs, CommitPoint state, bool fresh)
        {
            _outputs = outputs;
            _arrays = new NpyAppender[outputs.Length];
            FileStream? rows = null;
            try
            {
                for (int i = 0; i < outputs.Length; i++)
                {
                    string path = Path.Combine(folder, outputs[i].FileName);
                    _arrays[i] = fresh
                        ? NpyAppender.Create(path, outputs[i].Descr, outputs[i].Output.Width)
                        : NpyAppender.Reopen(folder, path, outputs[i].Descr, outputs[i].Output.Width, state.Accepted);
                }
                rows = RunTable.Rows.Open(folder, fresh, state.RowsBytes);
                _rejects = RunTable.Rejects.Open(folder, fresh, state.RejectsBytes);
                _rows = rows;
            }
            catch
            {
                // A damaged file found on resume: nothing stays open (a file already cut back lost only rows after the last commit).
                rows?.Dispose();
                foreach (NpyAppender? a in _arrays)
                {
                    a?.Dispose();
                }
                throw;
            }
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

            RunTable.Append(_rows, w =>
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
            RunTable.Append(_rejects, w =>
            {
                foreach (InputRecord r in rejected)
                {
                    w.WriteField(r.Line, default);
                    w.WriteField(r.Rejection);
                    w.EndRecord();
                }
            });
        }

        public void Commit(CommitPoint state)
        {
            foreach (NpyAppender a in _arrays)
            {
                a.Commit(state.Accepted);
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
}
