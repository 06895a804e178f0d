using Assay.Evaluation;
using Assay.Output;
using Assay.Tests.Support;

namespace Assay.Tests.Evaluation;

/// <summary>
/// A study's control task and MLP probe on a tiny synthetic model: the cells are what the library computes on the
/// study's own runs (whose numbers are checked against outside references in ControlTaskTests and MlpProbeTests),
/// and they are cached like every other part.
/// </summary>
public sealed class StudyProbingTests : IDisposable
{
    private readonly TempFolder _t = new();

    public StudyProbingTests()
    {
        string[] texts = Features.FeatureExtractorTests.Texts;
        File.WriteAllLines(_t.File("train.jsonl"), Enumerable.Range(0, 30).Select(i => $"{{\"id\": \"r{i}\", \"text\": \"{texts[i % texts.Length]} {i}\", \"label\": \"{i % 3}\"}}"));
        File.WriteAllLines(_t.File("test.jsonl"), Enumerable.Range(0, 12).Select(i => $"{{\"id\": \"t{i}\", \"text\": \"{texts[(i + 2) % texts.Length]}\", \"label\": \"{i % 3}\"}}"));
    }

    public void Dispose() => _t.Dispose();

    private string Write(int mlp)
    {
        string path = _t.File("s.json");
        File.WriteAllText(path, $$"""
            {
              "train": "train.jsonl", "test": "test.jsonl",
              "models": { "m": "{{Checkpoints.Folder(Features.FeatureExtractorTests.Spec)}}" },
              "prompts": { "p": "{text} is" },
              "features": ["hidden", "cmean"],
              "folds": 2, "strengths": [0.1, 1],
              "layers": true, "control": "first-word", "mlp": {{mlp}}
            }
            """);
        return path;
    }

    [Fact]
    public void Selectivity_cells_are_the_librarys_on_the_studys_runs_and_are_kept_on_a_rerun()
    {
        string folder = _t.File("out");
        StudyResult r = Study.Run(StudySpec.Load(Write(mlp: 4)), folder);
        Assert.Equal(["linear", "mlp:4"], r.Selectivity.Select(x => x.Result.Kind.ToString()));
        Assert.Equal(3, r.Layers.Count); // layers 0 … 2 of the fixture model

        string runs = Path.Combine(folder, StudyFolder.RunsFolder, "m", "p");
        string trainRun = Path.Combine(runs, "train"), testRun = Path.Combine(runs, "test");
        RunFeatures train = RunFeatures.Load(trainRun, "hidden"), test = RunFeatures.Load(testRun, "hidden");
        string[] trainTypes = ControlTask.Types(trainRun, "first-word", Path.Combine(folder, StudyFolder.DataFolder, "train.jsonl"));
        string[] testTypes = ControlTask.Types(testRun, "first-word", Path.Combine(folder, StudyFolder.DataFolder, "test.jsonl"));
        foreach (StudySelectivity x in r.Selectivity)
        {
            SelectivityResult expected = ControlTask.Measure(train, trainTypes, test, testTypes, x.Result.Kind, r.Spec.Probe);
            Assert.Equal(expected.Task.Accuracy, x.Result.Task.Accuracy);
            Assert.Equal(expected.Control.Report.Accuracy, x.Result.Control.Report.Accuracy);
            Assert.Equal(expected.Control.LookupAccuracy, x.Result.Control.LookupAccuracy);
            Assert.Equal(expected.Control.MajorityAccuracy, x.Result.Control.MajorityAccuracy);
        }
        Assert.Equal(r.Cells.Single(c => c.Feature == "hidden").Score.Accuracy, r.Selectivity[0].Result.Task.Accuracy);

        // The same study again: every part is read back; another MLP width recomputes only the MLP's selectivity.
        var log = new List<string>();
        StudyResult again = Study.Run(StudySpec.Load(Write(mlp: 4)), folder, log: new Sink<string>(log));
        Assert.All(log.Where(l => l.StartsWith("m/p/", StringComparison.Ordinal) && !l.EndsWith("(already extracted)", StringComparison.Ordinal)), l => Assert.EndsWith("(kept from an earlier run)", l, StringComparison.Ordinal));
        Assert.Equal(r.Selectivity[1].Result.Selectivity, again.Selectivity[1].Result.Selectivity);
        log.Clear();
        StudyResult wider = Study.Run(StudySpec.Load(Write(mlp: 5)), folder, log: new Sink<string>(log));
        Assert.EndsWith("(kept from an earlier run)", log.Single(l => l.StartsWith("m/p/selectivity:linear:", StringComparison.Ordinal)), StringComparison.Ordinal);
        Assert.DoesNotContain("kept", log.Single(l => l.StartsWith("m/p/selectivity:mlp:5:", StringComparison.Ordinal)), StringComparison.Ordinal);
        Assert.Equal("mlp:5", wider.Selectivity[1].Result.Kind.ToString());
    }

    [Fact]
    public void Parts_made_by_another_engine_are_computed_again_and_the_log_says_so_first()
    {
        // A folder left by another engine version (an upgrade) used to stop the study at its first run ("a finished run
        // made with a different engine version"); now the log says so before anything is computed, and every part —
        // runs, cross-entropy, cells, probing parts — is made again by this engine, none kept.
        string folder = _t.File("engines");
        StudyResult old = Study.Run(StudySpec.Load(Write(mlp: 4)), folder, false, null, null, "0.0.1+earlier", CancellationToken.None);
        var log = new List<string>();
        StudyResult now = Study.Run(StudySpec.Load(Write(mlp: 4)), folder, log: new Sink<string>(log));
        Assert.StartsWith("this folder's parts were computed by engine 0.0.1+earlier with ", log[0], StringComparison.Ordinal);
        Assert.Contains("every extraction, cross-entropy and probe is computed again", log[0], StringComparison.Ordinal);
        Assert.DoesNotContain(log, l => l.Contains("kept from an earlier run", StringComparison.Ordinal) || l.EndsWith("(already extracted)", StringComparison.Ordinal));
        Assert.Contains(log, l => l.StartsWith("m/p/train: ", StringComparison.Ordinal));
        string record = File.ReadAllText(Path.Combine(folder, StudyFolder.EngineFile));
        Assert.Contains(Assay.Output.ExtractionRun.EngineVersion, record, StringComparison.Ordinal);
        // The same engine underneath: the same numbers.
        Assert.Equal(old.Cells.Select(c => c.Score.Accuracy), now.Cells.Select(c => c.Score.Accuracy));
        Assert.Equal(old.Models.Select(m => m.CrossEntropy.NatsPerToken), now.Models.Select(m => m.CrossEntropy.NatsPerToken));
        // And a third run by the same engine keeps everything, without the message.
        log.Clear();
        Study.Run(StudySpec.Load(Write(mlp: 4)), folder, log: new Sink<string>(log));
        Assert.DoesNotContain(log, l => l.StartsWith("this folder's parts", StringComparison.Ordinal));
        Assert.All(log.Where(l => l.StartsWith("m/p/", StringComparison.Ordinal) && !l.EndsWith("(already extracted)", StringComparison.Ordinal)), l => Assert.EndsWith("(kept from an earlier run)", l, StringComparison.Ordinal));
    }

    [Fact]
    public void The_layer_sweep_ends_at_the_hidden_cell_and_each_layer_is_the_probe_of_that_layer()
    {
        string folder = _t.File("out");
        StudyResult r = Study.Run(StudySpec.Load(Write(mlp: 4)), folder);
        Assert.Equal(["layer:0", "layer:1", "layer:2"], r.Layers.Select(c => c.Feature));
        // Layer L's last-token state is the hidden feature: the same probe, the same score.
        ClassificationReport hidden = r.Cells.Single(c => c.Feature == "hidden").Score, last = r.Layers[^1].Score;
        Assert.Equal((hidden.Accuracy, hidden.LogLoss, hidden.MacroF1), (last.Accuracy, last.LogLoss, last.MacroF1));
        string runs = Path.Combine(folder, StudyFolder.RunsFolder, "m", "p");
        RunFeatures train = RunFeatures.Load(Path.Combine(runs, "train"), "hidden.layer1.last"), test = RunFeatures.Load(Path.Combine(runs, "test"), "hidden.layer1.last");
        LinearProbe probe = LinearProbe.Fit(train.Values, train.Rows, train.Width, train.Labels, r.Spec.Probe);
        Assert.Equal(ProbeScorer.Score(probe, test, "test").Report.LogLoss, r.Layers[1].Score.LogLoss);

        // The report: the table with each row's best in bold, and the plot.
        Assay.Cli.Commands.StudyReport.Write(r, folder, Assay.Cli.Commands.StudyReport.Markdown(r));
        string md = File.ReadAllText(Path.Combine(folder, StudyFolder.MarkdownFile));
        Assert.Contains("Test accuracy by layer", md, StringComparison.Ordinal);
        Assert.Contains("| m | p | linear |", md, StringComparison.Ordinal);
        Assert.Contains("| m | p | mlp:4 |", md, StringComparison.Ordinal);
        byte[] png = File.ReadAllBytes(Path.Combine(folder, StudyFolder.LayersPlot("p")));
        Assert.Equal([0x89, (byte)'P', (byte)'N', (byte)'G'], png[..4]);
    }

    [Fact]
    public void A_series_of_checkpoints_is_one_line_and_gives_the_loss_curve_a_point_per_checkpoint()
    {
        // Three checkpoints of one shape with other weights (other seeds), filed under step names out of order.
        foreach ((string name, ulong seed) in new[] { ("step-30", 3UL), ("step-5", 1UL), ("step-200", 2UL) })
        {
            string source = Checkpoints.Folder(Features.FeatureExtractorTests.Spec with { Seed = seed });
            Directory.CreateDirectory(_t.File("series/" + name));
            foreach (string file in Directory.GetFiles(source))
            {
                File.Copy(file, Path.Combine(_t.File("series/" + name), Path.GetFileName(file)));
            }
        }
        File.WriteAllText(_t.File("series.json"), """
            {
              "train": "train.jsonl", "test": "test.jsonl",
              "series": { "folder": "series" },
              "prompts": { "p": "{text} is" },
              "features": ["hidden"],
              "folds": 2, "strengths": [1]
            }
            """);
        StudyResult r = Study.Run(StudySpec.Load(_t.File("series.json")), _t.File("series-out"));
        Assert.Equal(["step5", "step30", "step200"], r.Models.Select(m => m.Name));
        StudyCurve curve = Assert.Single(r.Curves);
        Assert.Equal(r.Models.Select(m => m.CrossEntropy.NatsPerToken), curve.Points.Select(p => p.CrossEntropy));
        Assert.Equal(3, r.Models.Select(m => m.CrossEntropy.NatsPerToken).Distinct().Count());
    }

    [Fact]
    public void Probing_fields_that_cannot_be_met_are_refused_naming_the_field()
    {
        string path = Write(mlp: 4);
        File.WriteAllText(path, File.ReadAllText(path).Replace("\"first-word\"", "\"field:lemma\"", StringComparison.Ordinal));
        Assert.Contains("control: \"field:lemma\" is not a type key of a study", Assert.Throws<StudyException>(() => StudySpec.Load(path)).Message, StringComparison.Ordinal);
        File.WriteAllText(path, File.ReadAllText(path).Replace("\"control\": \"field:lemma\", ", "", StringComparison.Ordinal));
        Assert.Contains("mlp: the MLP probe is fitted for selectivity; give control too", Assert.Throws<StudyException>(() => StudySpec.Load(path)).Message, StringComparison.Ordinal);
        File.WriteAllText(path, File.ReadAllText(path).Replace("\"mlp\": 4", "\"compare\": [[\"hidden\", \"words\"]]", StringComparison.Ordinal));
        Assert.Contains("compare: \"words\" is not one of the features", Assert.Throws<StudyException>(() => StudySpec.Load(path)).Message, StringComparison.Ordinal);
    }
}
