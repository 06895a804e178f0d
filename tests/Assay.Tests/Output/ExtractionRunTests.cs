using System.Text.Json;
using Assay.Features;
using Assay.Fixtures;
using Assay.Input;
using Assay.Model;
using Assay.Output;
using Assay.Tests.Features;
using Assay.Tests.Support;

namespace Assay.Tests.Output;

public sealed class ExtractionRunTests
{
    private static readonly IReadOnlyList<FeatureRequest> AllKinds =
    [
        new HiddenStateFeature(-1), new HiddenStateFeature(1, HiddenPooling.Mean), new NextWordFeature(), new TopTokensFeature(3),
        new WordListFeature(["lamp", "rope"], FullLogLikelihood: true), new ConditionalMeanFeature(), new CompletionFeature(["a tool"]),
    ];

    private static LanguageModel Model(CheckpointSpec? spec = null) => LanguageModel.Open(Checkpoints.Folder(spec ?? FeatureExtractorTests.Spec));

    /// <summary>JSONL input: <paramref name="count"/> texts with ids and labels, and two bad lines among them.</summary>
    internal static string WriteInput(TempFolder temp, int count, string name = "input.jsonl")
    {
        var lines = new List<string>();
        for (int i = 0; i < count; i++)
        {
            lines.Add(JsonSerializer.Serialize(new { id = $"t{i}", text = FeatureExtractorTests.Texts[i % FeatureExtractorTests.Texts.Length] + (i % 3 == 0 ? " again" : ""), label = i % 4 }));
            if (i == 3)
            {
                lines.Add("{broken");
            }
            if (i == count / 2)
            {
                lines.Add("{\"id\": \"no text\"}");
            }
        }
        string path = temp.File(name);
        File.WriteAllLines(path, lines);
        return path;
    }

    private static RunOptions Options(IReadOnlyList<FeatureRequest>? features = null) => new()
    {
        Extraction = new ExtractionOptions { Prompt = PromptTemplate.Parse("{text} It is a kind of"), Features = features ?? AllKinds },
        CommitRows = 16,
    };

    /// <summary>Every file of a run folder but timing.json, which records wall-clock times.</summary>
    internal static Dictionary<string, byte[]> Bytes(string folder) => Directory.GetFiles(folder)
        .Where(f => Path.GetFileName(f) != RunFolder.TimingFile)
        .ToDictionary(f => Path.GetFileName(f), File.ReadAllBytes);

    [Fact]
    public void Run_folder_holds_every_output_that_numpy_loads_with_its_shape_and_dtype()
    {
        using var temp = new TempFolder();
        string input = WriteInput(temp, 40);
        string run = temp.File("run");
        RunSummary s = ExtractionRun.Execute(Model(), input, run, Options());
        Assert.Equal((42L, 40L, 2L), (s.Read, s.Accepted, s.Rejected));

        // numpy (Debian python3-numpy) is the reference reader of the .npy format.
        using JsonDocument numpy = JsonDocument.Parse(PythonReference.Run("run_folder_numpy.py", run));
        var files = numpy.RootElement.GetProperty("files");
        (string Name, int Width, string DType)[] expected =
        [
            ("hidden.layer2.last.npy", 48, "float32"), ("hidden.layer1.mean.npy", 48, "float32"), ("nextword.npy", 300, "float32"),
            ("topk3.ids.npy", 3, "int32"), ("topk3.probs.npy", 3, "float32"), ("words.first.npy", 2, "float32"),
            ("words.loglik.npy", 2, "float32"), ("cmean.npy", 48, "float32"), ("completions.loglik.npy", 1, "float32"),
        ];
        Assert.Equal(expected.Length, files.EnumerateObject().Count());
        foreach ((string name, int width, string dtype) in expected)
        {
            JsonElement f = files.GetProperty(name);
            Assert.Equal([40, width], f.GetProperty("shape").EnumerateArray().Select(x => x.GetInt32()));
            Assert.Equal(dtype, f.GetProperty("dtype").GetString());
        }

        // The row table follows input order; the rejects file names lines and reasons; the counts add up.
        string[] rows = File.ReadAllLines(Path.Combine(run, RunFolder.RowsFile));
        Assert.Equal("row,line,id,label,tokens,truncated_tokens", rows[0]);
        Assert.Equal(Enumerable.Range(0, 40).Select(i => $"t{i}"), rows.Skip(1).Select(r => r.Split(',')[2]));
        Assert.StartsWith("0,1,t0,0,", rows[1], StringComparison.Ordinal);
        Assert.StartsWith("4,6,t4,0,", rows[5], StringComparison.Ordinal);   // line 5 is the broken one
        string[] rejects = File.ReadAllLines(Path.Combine(run, RunFolder.RejectsFile));
        Assert.Equal(3, rejects.Length);
        Assert.StartsWith("5,", rejects[1], StringComparison.Ordinal);
        Assert.Contains("no \"\"text\"\" field", rejects[2], StringComparison.Ordinal);

        using JsonDocument record = JsonDocument.Parse(File.ReadAllBytes(Path.Combine(run, RunFolder.RecordFile)));
        JsonElement counts = record.RootElement.GetProperty("counts");
        Assert.Equal(counts.GetProperty("read").GetInt64(), counts.GetProperty("accepted").GetInt64() + counts.GetProperty("rejected").GetInt64());
        Assert.Equal("{text} It is a kind of", record.RootElement.GetProperty("settings").GetProperty("prompt").GetString());
        Assert.False(File.Exists(Path.Combine(run, RunFolder.ProgressFile)));
        using JsonDocument timing = JsonDocument.Parse(File.ReadAllBytes(Path.Combine(run, RunFolder.TimingFile)));
        Assert.True(timing.RootElement.GetProperty("peak_rss_bytes").GetInt64() > 0);
    }

    [Fact]
    public void Written_cmean_equals_the_embedding_matrix_times_the_written_distribution_in_numpy()
    {
        // The demo shape: GPT-2's 50,257-token vocabulary and width 256, stored in float16.
        using var temp = new TempFolder();
        string input = WriteInput(temp, 12);
        string run = temp.File("run");
        ExtractionRun.Execute(Model(CheckpointSpec.Demo), input, run, Options([new NextWordFeature(), new ConditionalMeanFeature()]));
        using JsonDocument numpy = JsonDocument.Parse(PythonReference.Run("run_folder_numpy.py", run, Checkpoints.Folder(CheckpointSpec.Demo)));
        double maxAbs = numpy.RootElement.GetProperty("cmean_max_abs").GetDouble();
        double scale = numpy.RootElement.GetProperty("cmean_scale").GetDouble();
        Assert.True(scale > 1e-3, $"Φp is degenerate (max |Φp| = {scale})");
        // Float32 products summed in 64 lanes over 50,257 terms against numpy's float64 p @ E.
        Assert.True(maxAbs <= 1e-6 + (1e-5 * scale), $"max |Φp − p·E| = {maxAbs:E2}, max |Φp| = {scale:E2}");
        Assert.True(numpy.RootElement.GetProperty("p_row_sum_max_dev").GetDouble() < 1e-5);
    }

    [Fact]
    public void Float16_files_are_numpy_rounding_of_the_float32_run()
    {
        using var temp = new TempFolder();
        string input = WriteInput(temp, 20);
        LanguageModel m = Model();
        ExtractionRun.Execute(m, input, temp.File("f32"), Options());
        ExtractionRun.Execute(m, input, temp.File("f16"), Options() with { Precision = FeaturePrecision.Binary16 });
        using JsonDocument numpy = JsonDocument.Parse(PythonReference.Run("run_folder_numpy.py", temp.File("f16"), "--half-of", temp.File("f32")));
        JsonElement mismatches = numpy.RootElement.GetProperty("half_mismatches");
        Assert.Equal(8, mismatches.EnumerateObject().Count());          // every floating output; ids stay int32
        Assert.All(mismatches.EnumerateObject(), f => Assert.Equal(0, f.Value.GetInt32()));
        Assert.Equal(File.ReadAllBytes(temp.File("f32/topk3.ids.npy")), File.ReadAllBytes(temp.File("f16/topk3.ids.npy")));
    }

    [Fact]
    public void Identical_runs_give_identical_bytes()
    {
        using var temp = new TempFolder();
        string input = WriteInput(temp, 50);
        LanguageModel m = Model();
        ExtractionRun.Execute(m, input, temp.File("a"), Options());
        ExtractionRun.Execute(m, input, temp.File("b"), Options() with { Extraction = Options().Extraction with { TokenBudget = 7, MaxThreads = 1 } });
        Dictionary<string, byte[]> a = Bytes(temp.File("a")), b = Bytes(temp.File("b"));
        Assert.Equal(a.Keys.Order(), b.Keys.Order());
        Assert.All(a, f => Assert.True(f.Value.AsSpan().SequenceEqual(b[f.Key]), $"{f.Key} differs"));
    }

    [Fact]
    public void Cancelled_runs_resume_to_the_same_bytes()
    {
        using var temp = new TempFolder();
        string input = WriteInput(temp, 100);
        LanguageModel m = Model();
        ExtractionRun.Execute(m, input, temp.File("whole"), Options());
        Dictionary<string, byte[]> whole = Bytes(temp.File("whole"));

        string run = temp.File("pieces");
        int sessions = 0;
        foreach (int stopAfter in new[] { 1, 3, 2, 4 })
        {
            using var cancel = new CancellationTokenSource();
            int reports = 0;
            var progress = new SyncProgress(_ =>
            {
                if (++reports == stopAfter)
                {
                    cancel.Cancel();
                }
            });
            Assert.ThrowsAny<OperationCanceledException>(() =>
                ExtractionRun.Execute(m, input, run, Options() with { Resume = sessions > 0 }, progress, cancel.Token));
            sessions++;
            Assert.True(File.Exists(Path.Combine(run, RunFolder.ProgressFile)));
        }
        RunSummary s = ExtractionRun.Execute(m, input, run, Options() with { Resume = true });
        Assert.True(s.ResumedAt > 0);
        Dictionary<string, byte[]> resumed = Bytes(run);
        Assert.Equal(whole.Keys.Order(), resumed.Keys.Order());
        Assert.All(whole, f => Assert.True(f.Value.AsSpan().SequenceEqual(resumed[f.Key]), $"{f.Key} differs after resuming"));
        using JsonDocument timing = JsonDocument.Parse(File.ReadAllBytes(Path.Combine(run, RunFolder.TimingFile)));
        Assert.Equal(5, timing.RootElement.GetProperty("sessions").GetArrayLength());
    }

    [Fact]
    public void A_finished_run_is_never_overwritten_unless_asked()
    {
        using var temp = new TempFolder();
        string input = WriteInput(temp, 10);
        LanguageModel m = Model();
        string run = temp.File("run");
        ExtractionRun.Execute(m, input, run, Options());
        Dictionary<string, byte[]> before = Bytes(run);

        RunFolderException e = Assert.Throws<RunFolderException>(() => ExtractionRun.Execute(m, input, run, Options()));
        Assert.Contains("pass --overwrite", e.Message, StringComparison.Ordinal);
        Assert.True(ExtractionRun.Execute(m, input, run, Options() with { Resume = true }).AlreadyComplete);
        Assert.Equal(before.Keys.Order(), Bytes(run).Keys.Order());
        Assert.All(before, f => Assert.Equal(f.Value, File.ReadAllBytes(Path.Combine(run, f.Key))));

        ExtractionRun.Execute(m, input, run, Options([new HiddenStateFeature(0)]) with { Overwrite = true });
        Assert.Equal(["hidden.layer0.last.npy", "record.json", "rejects.csv", "rows.csv", "timing.json"], Directory.GetFiles(run).Select(Path.GetFileName).Order());
    }

    [Fact]
    public void Resuming_with_other_settings_or_into_a_foreign_folder_is_refused()
    {
        using var temp = new TempFolder();
        string input = WriteInput(temp, 40);
        LanguageModel m = Model();
        string run = temp.File("run");
        using (var cancel = new CancellationTokenSource())
        {
            Assert.ThrowsAny<OperationCanceledException>(() =>
                ExtractionRun.Execute(m, input, run, Options(), new SyncProgress(_ => cancel.Cancel()), cancel.Token));
        }
        Assert.Contains("unfinished run; pass --resume", Assert.Throws<RunFolderException>(() =>
            ExtractionRun.Execute(m, input, run, Options())).Message, StringComparison.Ordinal);
        RunOptions otherPrompt = Options() with { Resume = true, Extraction = Options().Extraction with { Prompt = PromptTemplate.Parse("{text}!") } };
        Assert.Contains("different prompt", Assert.Throws<RunFolderException>(() =>
            ExtractionRun.Execute(m, input, run, otherPrompt)).Message, StringComparison.Ordinal);
        File.AppendAllText(input, "{\"text\": \"one more\"}\n");
        Assert.Contains("different input", Assert.Throws<RunFolderException>(() =>
            ExtractionRun.Execute(m, input, run, Options() with { Resume = true })).Message, StringComparison.Ordinal);

        string foreign = temp.File("foreign");
        Directory.CreateDirectory(foreign);
        File.WriteAllText(Path.Combine(foreign, "notes.txt"), "mine");
        Assert.Contains("notes.txt", Assert.Throws<RunFolderException>(() =>
            ExtractionRun.Execute(m, input, foreign, Options())).Message, StringComparison.Ordinal);
        Assert.Equal("mine", File.ReadAllText(Path.Combine(foreign, "notes.txt")));
    }

    [Fact]
    public void Strict_stops_at_the_first_rejected_record()
    {
        using var temp = new TempFolder();
        string input = WriteInput(temp, 10);
        TextInputException e = Assert.Throws<TextInputException>(() =>
            ExtractionRun.Execute(Model(), input, temp.File("run"), Options() with { Strict = true }));
        Assert.Equal(5, e.Line);
        Assert.Contains("stopped by --strict", e.Message, StringComparison.Ordinal);
    }

    internal sealed class SyncProgress(Action<RunProgress> report) : IProgress<RunProgress>
    {
        public void Report(RunProgress value) => report(value);
    }
}
