using System.CommandLine;
using System.Globalization;
using Assay.Features;
using Assay.Input;
using Assay.Model;
using Assay.Output;
using Assay.Weights;

namespace Assay.Cli.Commands;

/// <summary><c>assay extract &lt;input&gt; --out &lt;run-folder&gt; [--model &lt;dir&gt;]</c>: features of every text, streamed to a run folder.</summary>
internal static class ExtractCommand
{
    public const int Interrupted = 130;

    /// <summary>The run folder could not be written (full disk, read-only or forbidden folder): EX_IOERR.</summary>
    public const int WriteFailed = 74;

    public static Command Create()
    {
        var folder = ModelOption.Create();
        var input = new Argument<FileInfo>("input") { Description = "Texts: plain lines (.txt), JSON lines (.jsonl), CSV (.csv) or TSV (.tsv) with a header." };
        var output = new Option<DirectoryInfo>("--out", "-o") { Description = "Run folder to write (created if missing).", Required = true };
        var prompt = new Option<string>("--prompt") { Description = "Template around each text, with {text} and optionally {mark}; {{ and }} for braces.", DefaultValueFactory = _ => "{text}" };
        var features = new Option<string>("--features") { Description = "Comma-separated: " + FeatureSpec.Syntax + ".", DefaultValueFactory = _ => FeatureSpec.Default };
        var words = new Option<FileInfo>("--words") { Description = "Word list for words / words-loglik: one word per line." };
        var completions = new Option<FileInfo>("--completions") { Description = "Candidate completions for completions: one per line." };
        var precision = new Option<string>("--precision") { Description = "float32 or float16 for the floating features.", DefaultValueFactory = _ => "float32" };
        var shared = new SharedOptions();
        var commit = new Option<int>("--commit-rows") { Description = "Rows per commit (the most a crash can lose).", DefaultValueFactory = _ => new RunOptions().CommitRows };
        var resume = new Option<bool>("--resume") { Description = "Continue the unfinished run in the folder." };
        var overwrite = new Option<bool>("--overwrite") { Description = "Replace a run already in the folder." };
        var strict = new Option<bool>("--strict") { Description = "Stop at the first bad record instead of writing it to rejects.csv." };
        var shard = new Option<string>("--shard") { Description = "k/n: only shard k of n (accepted row i goes to shard i mod n + 1); merge the n folders with assay merge. Default: from SLURM_ARRAY_TASK_ID, SLURM_ARRAY_TASK_MIN and SLURM_ARRAY_TASK_COUNT in a Slurm job array; 1/1 = unsharded." };
        var yes = new Option<bool>("--yes") { Description = "Go on when the run would write more than 2 GiB of features (the estimate is printed first)." };
        var progressSeconds = new Option<double>("--progress-seconds") { Description = "Seconds between progress lines when stderr is not a terminal.", DefaultValueFactory = _ => 10 };

        var command = new Command("extract", "Run the model over every text of an input file and write the requested features to a run folder.")
        {
            input, output, folder, prompt, features, words, completions, precision, commit, resume, overwrite, strict, shard, yes, progressSeconds,
        };
        shared.AddInput(command, fields: true);
        shared.AddModel(command, prompted: true);
        command.SetAction(r => CommandRunner.Run(() =>
        {
            ModelRun run = shared.Model(r);
            var request = new Request(
                r.GetValue(folder)!.FullName, SharedOptions.InputPath(r.GetValue(input)!), r.GetValue(output)!.FullName,
                r.GetValue(prompt)!, r.GetValue(features)!, r.GetValue(words)?.FullName, r.GetValue(completions)?.FullName,
                r.GetValue(shared.Format)!, shared.Fields(r),
                run.Keep, run.LeadingSpace, r.GetValue(precision)!, run.Weights, run.TokenBudget, r.GetValue(commit),
                run.Threads, r.GetValue(resume), r.GetValue(overwrite), r.GetValue(strict), r.GetValue(progressSeconds),
                r.GetValue(shard), r.GetValue(yes)) { Bos = run.Bos };
            using var cancel = new CancellationTokenSource();
            ConsoleCancelEventHandler onCancel = (_, e) =>
            {
                e.Cancel = true;
                cancel.Cancel();
            };
            Console.CancelKeyPress += onCancel;
            try
            {
                return Run(request, Console.Out, Console.Error, cancel.Token);
            }
            finally
            {
                Console.CancelKeyPress -= onCancel;
            }
        }));
        return command;
    }

    internal sealed record Request(
        string Model, string Input, string Output, string Prompt, string Features, string? Words, string? Completions,
        string Format, InputFields Fields, string Keep, bool LeadingSpace, string Precision, string Weights, int TokenBudget, int CommitRows,
        int Threads, bool Resume, bool Overwrite, bool Strict, double ProgressSeconds, string? Shard = null, bool Yes = false,
        long ConfirmAboveBytes = ConfirmAbove)
    {
        /// <summary>The --bos policy.</summary>
        public string Bos { get; init; } = "auto";
    }

    /// <summary>Feature bytes above which a run asks for --yes.</summary>
    internal const long ConfirmAbove = 2L << 30;

    internal static int Run(Request q, TextWriter o, TextWriter err, CancellationToken cancellationToken)
    {
        PromptTemplate template = Prompt(q.Prompt);
        var run = new ModelRun(q.Weights, q.Threads, q.TokenBudget, q.Keep, q.LeadingSpace, q.Bos);
        _ = run.Validate();
        Positive("--commit-rows", q.CommitRows);
        if (!(q.ProgressSeconds > 0 && double.IsFinite(q.ProgressSeconds)))
        {
            throw new ArgumentException(string.Create(CultureInfo.InvariantCulture, $"--progress-seconds {q.ProgressSeconds}: expected a positive number of seconds"));
        }
        InputFormat format = Format(q.Format);
        FeaturePrecision precision = Spellings.Parse<FeaturePrecision>("--precision", q.Precision);
        TextInputReader.Check(q.Input);

        RunShard? shard = Shard(q.Shard, Environment.GetEnvironmentVariable, err);
        LanguageModel model = run.Open(q.Model, err);
        var options = new RunOptions
        {
            Extraction = run.Extraction(template, FeatureOption.Parse(q.Features, model.Config.Layers, q.Words, q.Completions)),
            Format = format,
            Fields = q.Fields,
            Precision = precision,
            Resume = q.Resume,
            Overwrite = q.Overwrite,
            Strict = q.Strict,
            CommitRows = q.CommitRows,
            Shard = shard,
        };

        if (ExtractionRun.Estimate(model, q.Input, options) is RunEstimate estimate)
        {
            CheckSize(estimate, q, err);
        }
        else
        {
            err.WriteLine($"assay: reading {q.Input} as a pipe: once, as it comes; no output estimate, no share of the input in the progress, and no --resume");
        }

        var printer = new ProgressPrinter(err, interactive: !Console.IsErrorRedirected && ReferenceEquals(err, Console.Error),
            TimeSpan.FromSeconds(Math.Max(0.1, q.ProgressSeconds)));
        RunSummary summary;
        try
        {
            summary = ExtractionRun.Execute(model, q.Input, q.Output, options, printer, cancellationToken);
        }
        catch (OperationCanceledException)
        {
            printer.End();
            err.WriteLine($"assay: interrupted; the rows committed so far are kept in {q.Output}. Rerun the same command with --resume to go on.");
            return Interrupted;
        }
        catch (Exception e) when (e is IOException or UnauthorizedAccessException && e is not FileNotFoundException and not DirectoryNotFoundException)
        {
            printer.End();
            err.WriteLine($"assay: cannot write the run folder {q.Output}: {e.Message.TrimEnd('.')}. The rows committed so far are kept; free space or make the folder writable, then rerun the same command with --resume.");
            return WriteFailed;
        }
        printer.End();
        PrintSummary(o, q.Output, summary, shard);
        return 0;
    }

    /// <summary>
    /// The shard to run: --shard k/n; else, inside a Slurm job array, task (SLURM_ARRAY_TASK_ID − SLURM_ARRAY_TASK_MIN
    /// + 1) of SLURM_ARRAY_TASK_COUNT, said on stderr; else none. n = 1 is an unsharded run.
    /// </summary>
    internal static RunShard? Shard(string? option, Func<string, string?> environment, TextWriter err)
    {
        if (option != null)
        {
            string[] parts = option.Split('/');
            if (parts.Length != 2 || !int.TryParse(parts[0], NumberStyles.None, CultureInfo.InvariantCulture, out int k)
                || !int.TryParse(parts[1], NumberStyles.None, CultureInfo.InvariantCulture, out int n) || n < 1 || k < 1 || k > n)
            {
                throw new ArgumentException($"--shard {option}: expected k/n with 1 ≤ k ≤ n, such as 2/8");
            }
            return n == 1 ? null : new RunShard(k, n);
        }
        string? id = environment("SLURM_ARRAY_TASK_ID"), count = environment("SLURM_ARRAY_TASK_COUNT");
        if (id == null || count == null)
        {
            return null;
        }
        string min = environment("SLURM_ARRAY_TASK_MIN") ?? "0";
        if (!int.TryParse(id, NumberStyles.None, CultureInfo.InvariantCulture, out int task)
            || !int.TryParse(count, NumberStyles.None, CultureInfo.InvariantCulture, out int tasks)
            || !int.TryParse(min, NumberStyles.None, CultureInfo.InvariantCulture, out int first))
        {
            throw new ArgumentException($"the Slurm array environment (SLURM_ARRAY_TASK_ID={id}, SLURM_ARRAY_TASK_MIN={min}, SLURM_ARRAY_TASK_COUNT={count}) is not numeric; pass --shard k/n");
        }
        int index = task - first + 1;
        if (index < 1 || index > tasks)
        {
            throw new ArgumentException(string.Create(CultureInfo.InvariantCulture,
                $"Slurm array task {task} is not one of {tasks} consecutive tasks from {first} (SLURM_ARRAY_TASK_ID, _MIN, _COUNT): give the array as a range, such as --array=0-{tasks - 1}, or pass --shard k/n"));
        }
        if (tasks == 1)
        {
            return null;
        }
        var shard = new RunShard(index, tasks);
        err.WriteLine(string.Create(CultureInfo.InvariantCulture,
            $"assay: shard {shard} from the Slurm job array (task {task}, first {first}, {tasks} tasks); pass --shard 1/1 to run unsharded"));
        return shard;
    }

    /// <summary>Says what a large run will write; refuses more than the threshold without --yes; warns when the disk looks too small.</summary>
    private static void CheckSize(RunEstimate e, Request q, TextWriter err)
    {
        CultureInfo inv = CultureInfo.InvariantCulture;
        string total = Size(e.Bytes);
        if (e.Bytes >= q.ConfirmAboveBytes / 32)
        {
            // Said for runs large enough to matter (64 MiB and up by default), so a small run's refusal stays one line.
            err.WriteLine(string.Create(inv, $"assay: about {e.Rows:N0} rows × {Size(e.BytesPerRow)} = {total} of features ({e.LargestOutput.Name}: {Size(e.LargestOutput.Bytes)} a row)"));
        }
        if (e.Bytes > q.ConfirmAboveBytes && !q.Yes)
        {
            throw new ArgumentException(string.Create(inv,
                $"the run would write about {total} ({e.LargestOutput.Name} takes {Size(e.LargestOutput.Bytes)} a row); pass --yes to go on, or ask for less (topk:K instead of nextword, --precision float16)"));
        }
        long free = FreeBytes(q.Output);
        if (free >= 0 && free < e.Bytes)
        {
            err.WriteLine($"assay: the disk of {q.Output} has {Size(free)} free and the run would write about {total}; if it fills, the run stops with what it committed and goes on with --resume");
        }
    }

    /// <summary>Free bytes of the file system that holds <paramref name="folder"/> (or its nearest existing parent), or −1.</summary>
    private static long FreeBytes(string folder)
    {
        string? existing = Path.GetFullPath(folder);
        while (existing != null && !Directory.Exists(existing))
        {
            existing = Path.GetDirectoryName(existing);
        }
        if (existing == null)
        {
            return -1;
        }
        // The mount whose root is the longest prefix of the folder holds it.
        DriveInfo? drive = DriveInfo.GetDrives().Where(d => d.IsReady && existing.StartsWith(d.RootDirectory.FullName, StringComparison.Ordinal))
            .OrderByDescending(d => d.RootDirectory.FullName.Length).FirstOrDefault();
        return drive?.AvailableFreeSpace ?? -1;
    }

    private static string Size(long bytes) => bytes switch
    {
        >= 1L << 30 => string.Create(CultureInfo.InvariantCulture, $"{bytes / (double)(1L << 30):F1} GiB"),
        >= 1L << 20 => string.Create(CultureInfo.InvariantCulture, $"{bytes / (double)(1L << 20):F1} MiB"),
        >= 1L << 10 => string.Create(CultureInfo.InvariantCulture, $"{bytes / 1024.0:F1} KiB"),
        _ => string.Create(CultureInfo.InvariantCulture, $"{bytes} bytes"),
    };

    /// <summary>Refuses a count below 1, naming the option.</summary>
    internal static void Positive(string option, int value)
    {
        if (value < 1)
        {
            throw new ArgumentException(string.Create(CultureInfo.InvariantCulture, $"{option} {value}: expected a positive number"));
        }
    }

    /// <summary>The --prompt template, or a refusal naming the option.</summary>
    internal static PromptTemplate Prompt(string text)
    {
        try
        {
            return PromptTemplate.Parse(text);
        }
        catch (FormatException e)
        {
            throw new ArgumentException($"--prompt: {e.Message}", e);
        }
    }

    /// <summary>The --format names.</summary>
    internal static InputFormat Format(string name) => Spellings.Parse<InputFormat>("--format", name);

    private static void PrintSummary(TextWriter o, string folder, RunSummary s, RunShard? shard)
    {
        CultureInfo inv = CultureInfo.InvariantCulture;
        o.WriteLine($"run folder  {folder}");
        if (shard != null)
        {
            o.WriteLine($"shard       {shard}: accepted rows i with i mod {shard.Count} = {shard.Index - 1}{(shard.Index == 1 ? ", and every reject" : "")}; merge all {shard.Count} with assay merge");
        }
        if (s.AlreadyComplete)
        {
            o.WriteLine("            already finished; nothing to do (pass --overwrite to run it again)");
        }
        else if (s.ResumedAt > 0)
        {
            o.WriteLine(string.Create(inv, $"resumed     after {s.ResumedAt:N0} committed rows"));
        }
        string others = shard == null ? "" : string.Create(inv, $" + {s.Read - s.Accepted - s.Rejected:N0} left to the other shards");
        o.WriteLine(string.Create(inv, $"records     {s.Read:N0} read = {s.Accepted:N0} accepted{others} + {s.Rejected:N0} rejected{(s.Rejected > 0 ? $" (see {RunFolder.RejectsFile})" : "")}"));
        o.WriteLine(string.Create(inv, $"truncated   {s.TruncatedRows:N0} rows cut to fit the context"));
        double seconds = s.Elapsed.TotalSeconds;
        o.WriteLine(string.Create(inv, $"tokens      {s.Tokens:N0} in all rows' filled templates; this session {seconds:F1} s"));
        if (File.Exists(Path.Combine(folder, RunFolder.RecordFile)))
        {
            foreach (RunOutputFile f in RunRecord.Read(folder).Files)
            {
                o.WriteLine(string.Create(inv, $"file        {f.File}  {f.DType}  ({f.Rows} × {f.Width})"));
            }
        }
    }
}
