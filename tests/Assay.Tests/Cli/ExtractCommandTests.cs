using System.Diagnostics;
using Assay.Cli.Commands;
using Assay.Input;
using Assay.Output;
using Assay.Tests.Features;
using Assay.Tests.Output;
using Assay.Tests.Support;

namespace Assay.Tests.Cli;

public sealed class ExtractCommandTests
{
    internal static ExtractCommand.Request Request(string input, string output, string features = "hidden,cmean", bool resume = false,
        string prompt = "{text} It is a kind of", int commitRows = 8, string? words = null, string weights = "float32") => new(
        Checkpoints.Folder(FeatureExtractorTests.Spec), input, output, prompt, features, words, null, "auto", new InputFields(),
        "head", LeadingSpace: true, "float32", weights, TokenBudget: 4096, commitRows, Threads: 0, resume, Overwrite: false, Strict: false,
        ProgressSeconds: 0.1);

    [Fact]
    public void Extract_writes_the_run_and_a_summary_whose_counts_add_up()
    {
        using var temp = new TempFolder();
        string input = ExtractionRunTests.WriteInput(temp, 30);
        File.WriteAllLines(temp.File("words.txt"), ["lamp", "", "rope"]);
        var o = new StringWriter();
        var err = new StringWriter();
        int rc = ExtractCommand.Run(Request(input, temp.File("run"), "hidden:all:mean,topk:2,words", words: temp.File("words.txt")), o, err, CancellationToken.None);
        Assert.Equal(0, rc);
        string summary = o.ToString();
        Assert.Contains("records     32 read = 30 accepted + 2 rejected (see rejects.csv)", summary, StringComparison.Ordinal);
        Assert.Contains("hidden.layer0.mean.npy  <f4  (30 × 48)", summary, StringComparison.Ordinal);
        Assert.Contains("words.first.npy  <f4  (30 × 2)", summary, StringComparison.Ordinal);
        Assert.Contains("assay: 30 rows, 32 records read (2 rejected), 100 % of input", err.ToString(), StringComparison.Ordinal);
        Assert.Equal(3, Directory.GetFiles(temp.Path, "run/hidden.layer*.mean.npy").Length);
    }

    [Theory]
    [InlineData("hidden:x", "\"x\" is not a whole number")]
    [InlineData("hidden:1:max", "pooling \"max\"")]
    [InlineData("topk:0", "expected a positive number")]
    [InlineData("probs", "unknown feature \"probs\"")]
    [InlineData("words", "needs --words FILE")]
    public void Bad_feature_lists_are_refused(string features, string message)
    {
        using var temp = new TempFolder();
        string input = ExtractionRunTests.WriteInput(temp, 3);
        ArgumentException e = Assert.Throws<ArgumentException>(() =>
            ExtractCommand.Run(Request(input, temp.File("run"), features), TextWriter.Null, TextWriter.Null, CancellationToken.None));
        Assert.Contains(message, e.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void A_run_says_what_it_will_write_and_a_large_one_needs_yes()
    {
        using var temp = new TempFolder();
        string input = ExtractionRunTests.WriteInput(temp, 40);   // 42 lines: 40 good records and 2 bad ones
        var big = Request(input, temp.File("run"), "nextword,cmean") with { ConfirmAboveBytes = 10_000 };
        var e = Assert.Throws<ArgumentException>(() => ExtractCommand.Run(big, TextWriter.Null, TextWriter.Null, CancellationToken.None));
        Assert.Contains("the run would write about 57.1 KiB (nextword.npy takes 1.2 KiB a row); pass --yes", e.Message, StringComparison.Ordinal);
        Assert.False(Directory.Exists(temp.File("run")));

        var err = new StringWriter();
        Assert.Equal(0, ExtractCommand.Run(big with { Yes = true }, TextWriter.Null, err, CancellationToken.None));
        // 42 lines × (300 + 48 floats): an upper bound of what was written (40 rows), stated before the run.
        Assert.Contains("assay: about 42 rows × 1.4 KiB = 57.1 KiB of features (nextword.npy: 1.2 KiB a row)", err.ToString(), StringComparison.Ordinal);
        long written = Directory.GetFiles(temp.File("run"), "*.npy").Sum(f => new FileInfo(f).Length - 128);
        Assert.Equal(40L * (300 + 48) * 4, written);
    }

    [Fact]
    public void Bfloat16_weights_are_recorded_and_a_run_cannot_switch_them()
    {
        using var temp = new TempFolder();
        string input = ExtractionRunTests.WriteInput(temp, 12);
        Assert.Equal(0, ExtractCommand.Run(Request(input, temp.File("run"), weights: "bfloat16"), TextWriter.Null, TextWriter.Null, CancellationToken.None));
        using (var record = System.Text.Json.JsonDocument.Parse(File.ReadAllBytes(Path.Combine(temp.File("run"), RunFolder.RecordFile))))
        {
            Assert.Equal("bfloat16", record.RootElement.GetProperty("settings").GetProperty("model").GetProperty("weights").GetString());
        }
        RunFolderException e = Assert.Throws<RunFolderException>(() =>
            ExtractCommand.Run(Request(input, temp.File("run"), resume: true), TextWriter.Null, TextWriter.Null, CancellationToken.None));
        Assert.Contains("different model", e.Message, StringComparison.Ordinal);
        ArgumentException bad = Assert.Throws<ArgumentException>(() =>
            ExtractCommand.Run(Request(input, temp.File("other"), weights: "int4"), TextWriter.Null, TextWriter.Null, CancellationToken.None));
        Assert.Contains("--weights int4", bad.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void A_bad_prompt_is_refused_before_anything_is_written()
    {
        using var temp = new TempFolder();
        string input = ExtractionRunTests.WriteInput(temp, 3);
        ArgumentException e = Assert.Throws<ArgumentException>(() =>
            ExtractCommand.Run(Request(input, temp.File("run"), prompt: "no placeholder"), TextWriter.Null, TextWriter.Null, CancellationToken.None));
        Assert.Contains("--prompt", e.Message, StringComparison.Ordinal);
        Assert.False(Directory.Exists(temp.File("run")));
    }

    /// <summary>
    /// The crash drill: a real child process (the assay executable) is killed with SIGKILL at points spread over the
    /// run, resumed each time, and the finished folder is compared byte for byte with an uninterrupted run.
    /// </summary>
    [Fact]
    public void Killed_child_processes_resume_to_the_bytes_of_an_uninterrupted_run()
    {
        using var temp = new TempFolder();
        string input = ExtractionRunTests.WriteInput(temp, 1200);
        string[] common = ["extract", input, "--model", Checkpoints.Folder(FeatureExtractorTests.Spec), "--prompt", "{text} It is a kind of",
            "--features", "hidden,hidden:1:mean,cmean,topk:5,completions", "--completions", WriteCompletions(temp), "--commit-rows", "8"];

        Assert.Equal(0, RunChild([.. common, "--out", temp.File("whole")], killAt: null).ExitCode);
        Dictionary<string, byte[]> expected = ExtractionRunTests.Bytes(temp.File("whole"));

        // Kill points: one during start-up (before any file exists), then at rising commit counts read from
        // progress.json, each followed by a random pause of up to 40 ms so the kill lands anywhere in the work
        // between commits: forward passes, appends, header rewrites, the progress file's replacement.
        string run = temp.File("killed");
        var rng = new Random(20261201);
        int[] targets = [.. Enumerable.Range(0, 49).Select(_ => rng.Next(0, 1150)).Order()];
        int killed = 0;
        for (int attempt = 0; attempt <= targets.Length; attempt++)
        {
            string[] args = attempt == 0 ? [.. common, "--out", run] : [.. common, "--out", run, "--resume"];
            KillPoint point = attempt == 0 ? new KillPoint(null, TimeSpan.FromMilliseconds(150))
                : new KillPoint(Path.Combine(run, RunFolder.ProgressFile), TimeSpan.FromMilliseconds(rng.Next(0, 40)), targets[attempt - 1]);
            if (RunChild(args, point).Killed)
            {
                killed++;
            }
        }
        Assert.True(killed >= 50, $"only {killed} of 50 kills landed before the run finished");
        Assert.Equal(0, RunChild([.. common, "--out", run, "--resume"], killAt: null).ExitCode);

        Dictionary<string, byte[]> actual = ExtractionRunTests.Bytes(run);
        Assert.Equal(expected.Keys.Order(), actual.Keys.Order());
        Assert.All(expected, f => Assert.True(f.Value.AsSpan().SequenceEqual(actual[f.Key]), $"{f.Key} differs after {killed} kills"));
    }

    private static string WriteCompletions(TempFolder temp)
    {
        string path = temp.File("completions.txt");
        File.WriteAllLines(path, ["tool", "place"]);
        return path;
    }

    /// <summary>When to kill: <paramref name="Pause"/> after the progress file shows <paramref name="Rows"/> committed rows (or after start, without a file).</summary>
    private sealed record KillPoint(string? ProgressFile, TimeSpan Pause, int Rows = 0);

    /// <summary>Runs the assay executable; with a kill point, SIGKILLs it there (if it is still running).</summary>
    private static (int ExitCode, bool Killed) RunChild(string[] args, KillPoint? killAt)
    {
        using Process p = StartChild(args);
        Task<string> stdout = p.StandardOutput.ReadToEndAsync();
        Task<string> stderr = p.StandardError.ReadToEndAsync();
        bool killed = false;
        if (killAt != null)
        {
            while (killAt.ProgressFile != null && !p.HasExited && CommittedRows(killAt.ProgressFile) < killAt.Rows)
            {
                Thread.Sleep(2);
            }
            if (!p.WaitForExit(killAt.Pause))
            {
                p.Kill();   // SIGKILL on Unix: no handler runs, nothing is flushed.
                killed = true;
            }
        }
        p.WaitForExit();
        if (!killed)
        {
            Assert.True(p.ExitCode == 0, $"assay {string.Join(' ', args)} exited {p.ExitCode}\n{stdout.Result}\n{stderr.Result}");
        }
        return (killed ? -1 : p.ExitCode, killed);
    }

    /// <summary>Starts the assay executable of the test's build with its output streams redirected.</summary>
    internal static Process StartChild(string[] args, bool standardInput = false)
    {
        var psi = new ProcessStartInfo("dotnet") { RedirectStandardOutput = true, RedirectStandardError = true, RedirectStandardInput = standardInput };
        psi.ArgumentList.Add(Path.Combine(AppContext.BaseDirectory, "assay.dll"));
        foreach (string a in args)
        {
            psi.ArgumentList.Add(a);
        }
        return Process.Start(psi)!;
    }

    private static long CommittedRows(string progressFile)
    {
        try
        {
            using var doc = System.Text.Json.JsonDocument.Parse(File.ReadAllBytes(progressFile));
            return doc.RootElement.GetProperty("accepted").GetInt64();
        }
        catch (Exception e) when (e is IOException or System.Text.Json.JsonException)
        {
            return -1;   // not there yet
        }
    }
}
