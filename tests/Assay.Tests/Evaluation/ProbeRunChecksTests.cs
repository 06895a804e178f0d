using System.Text.Json;
using System.Text.Json.Nodes;
using Assay.Cli.Commands;
using Assay.Evaluation;
using Assay.Features;
using Assay.Input;
using Assay.Model;
using Assay.Output;
using Assay.Tests.Features;
using Assay.Tests.Output;
using Assay.Tests.Support;

namespace Assay.Tests.Evaluation;

/// <summary>A probe never silently measures something else: runs, saved probes, features and output folders are checked.</summary>
public sealed class ProbeRunChecksTests
{
    private static readonly LanguageModel Model = LanguageModel.Open(Checkpoints.Folder(FeatureExtractorTests.Spec));

    private static RunOptions Options(string prompt = "{text}") => new()
    {
        Extraction = new() { Prompt = PromptTemplate.Parse(prompt), Features = [new HiddenStateFeature(-1), new HiddenStateFeature(1), new ConditionalMeanFeature()] },
    };

    private static (string Train, string Test) Runs(TempFolder temp, string testPrompt = "{text}")
    {
        ExtractionRun.Execute(Model, ExtractionRunTests.WriteInput(temp, 60, "train.jsonl"), temp.File("train"), Options());
        ExtractionRun.Execute(Model, ExtractionRunTests.WriteInput(temp, 24, "test.jsonl"), temp.File("test"), Options(testPrompt));
        return (temp.File("train"), temp.File("test"));
    }

    [Fact]
    public void Runs_extracted_differently_are_refused_unless_asked_and_then_recorded()
    {
        using var temp = new TempFolder();
        (string train, string test) = Runs(temp, testPrompt: "{text} It is");
        var e = Assert.Throws<ArgumentException>(() => ProbeCommand.Run(train, null, test, "cmean", temp.File("p"), 3, "1", TextWriter.Null));
        Assert.Contains("were extracted differently (prompt: \"{text}\" vs \"{text} It is\")", e.Message, StringComparison.Ordinal);
        Assert.Contains("--allow-different-runs", e.Message, StringComparison.Ordinal);
        Assert.False(Directory.Exists(temp.File("p")));

        var err = new StringWriter();
        Assert.Equal(0, ProbeCommand.Run(train, null, test, "cmean", temp.File("p"), 3, "1", TextWriter.Null, allowDifferentRuns: true, err: err));
        Assert.Contains("comparing different runs on purpose: prompt", err.ToString(), StringComparison.Ordinal);
        JsonNode report = JsonNode.Parse(File.ReadAllBytes(temp.File("p/report.json")))!;
        Assert.StartsWith("prompt: ", report["different_runs"]!.GetValue<string>(), StringComparison.Ordinal);
    }

    [Fact]
    public void A_saved_probe_records_its_feature_and_run_and_is_refused_elsewhere()
    {
        using var temp = new TempFolder();
        (string train, string test) = Runs(temp);
        var o = new StringWriter();
        // The feature named as --features names it; the report names the file stem.
        Assert.Equal(0, ProbeCommand.Run(train, null, test, "hidden:1", temp.File("p"), 3, "1", o));
        Assert.Contains("majority baseline: ", o.ToString(), StringComparison.Ordinal);
        JsonNode saved = JsonNode.Parse(File.ReadAllBytes(temp.File("p/probe.json")))!;
        Assert.Equal("hidden.layer1.last", saved["feature"]!.GetValue<string>());
        Assert.Equal(FeatureExtractorTests.Spec.Width, saved["width"]!.GetValue<int>());
        Assert.NotNull(saved["run_settings"]!["model"]!["files"]);
        Assert.Null(saved["run_settings"]!["input"]);

        // Another feature of the same width: refused with both names.
        var e = Assert.Throws<ArgumentException>(() => ProbeCommand.Run(null, temp.File("p/probe.json"), test, "hidden.layer2.last", temp.File("q"), 3, "1", TextWriter.Null));
        Assert.Contains("the probe was fitted on hidden.layer1.last, not hidden.layer2.last", e.Message, StringComparison.Ordinal);

        // The same feature from another model's run: refused, naming the setting.
        LanguageModel other = LanguageModel.Open(Checkpoints.Folder(FeatureExtractorTests.Spec with { Seed = 99 }));
        ExtractionRun.Execute(other, ExtractionRunTests.WriteInput(temp, 24, "other.jsonl"), temp.File("other"), Options());
        e = Assert.Throws<ArgumentException>(() => ProbeCommand.Run(null, temp.File("p/probe.json"), temp.File("other"), "hidden:1", temp.File("q"), 3, "1", TextWriter.Null));
        Assert.True(e.Message.Contains("the probe's training run and this run differ in model.", StringComparison.Ordinal), e.Message);

        // A probe file from before probes recorded their origin.
        JsonObject bare = saved.AsObject();
        bare.Remove("feature");
        File.WriteAllText(temp.File("old.json"), bare.ToJsonString());
        e = Assert.Throws<ArgumentException>(() => ProbeCommand.Run(null, temp.File("old.json"), test, "hidden:1", temp.File("q"), 3, "1", TextWriter.Null));
        Assert.Contains("does not record the feature and run it was fitted on", e.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void Feature_names_in_kind_syntax_resolve_to_the_stems_the_run_holds()
    {
        using var temp = new TempFolder();
        (string train, _) = Runs(temp);
        Assert.Equal("hidden.layer2.last", RunFeatures.Resolve(train, "hidden"));
        Assert.Equal("hidden.layer2.last", RunFeatures.Resolve(train, "hidden:-1"));
        Assert.Equal("hidden.layer1.last", RunFeatures.Resolve(train, "hidden:1:last"));
        Assert.Equal("cmean", RunFeatures.Resolve(train, "cmean"));
        Assert.Equal("hidden.layer1.last", RunFeatures.Resolve(train, "hidden.layer1.last"));
        var e = Assert.Throws<RunFolderException>(() => RunFeatures.Resolve(train, "hidden:mean"));
        Assert.Contains("has no feature \"hidden:mean\" (hidden.layer2.mean.npy); it has cmean, hidden.layer1.last, hidden.layer2.last", e.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void A_report_folder_is_never_overwritten_unless_asked_and_never_one_with_other_files()
    {
        using var temp = new TempFolder();
        (string train, string test) = Runs(temp);
        Assert.Equal(0, ProbeCommand.Run(train, null, test, "cmean", temp.File("p"), 3, "1", TextWriter.Null));
        byte[] first = File.ReadAllBytes(temp.File("p/report.json"));
        var e = Assert.Throws<RunFolderException>(() => ProbeCommand.Run(train, null, test, "hidden", temp.File("p"), 3, "1", TextWriter.Null));
        Assert.Contains("holds an earlier report", e.Message, StringComparison.Ordinal);
        Assert.Equal(first, File.ReadAllBytes(temp.File("p/report.json")));
        Assert.Equal(0, ProbeCommand.Run(train, null, test, "hidden", temp.File("p"), 3, "1", TextWriter.Null, overwrite: true));
        Assert.Contains("hidden.layer2.last", File.ReadAllText(temp.File("p/report.json")), StringComparison.Ordinal);

        Directory.CreateDirectory(temp.File("mine"));
        File.WriteAllText(temp.File("mine/notes.txt"), "mine");
        e = Assert.Throws<RunFolderException>(() => ProbeCommand.Run(train, null, test, "cmean", temp.File("mine"), 3, "1", TextWriter.Null, overwrite: true));
        Assert.Contains("not part of a report (notes.txt)", e.Message, StringComparison.Ordinal);
        Assert.True(File.Exists(temp.File("mine/notes.txt")));
    }

    [Fact]
    public void A_run_in_which_every_record_is_rejected_is_refused_and_left_unfinished()
    {
        using var temp = new TempFolder();
        string input = ExtractionRunTests.WriteInput(temp, 10);
        var options = Options() with { Fields = new InputFields { Text = "body" } };
        var e = Assert.Throws<TextInputException>(() => ExtractionRun.Execute(Model, input, temp.File("run"), options));
        Assert.Contains("no record was accepted (12 read, all rejected; first: line 1: no \"body\" field", e.Message, StringComparison.Ordinal);
        Assert.False(File.Exists(Path.Combine(temp.File("run"), RunFolder.RecordFile)));
        Assert.True(File.Exists(Path.Combine(temp.File("run"), RunFolder.RejectsFile)));
    }

    [Fact]
    public void Differences_are_named_by_their_path_and_both_values()
    {
        JsonNode a = JsonNode.Parse("""{"model":{"files":[{"name":"a","sha256":"11"},{"name":"b","sha256":"22"}]},"prompt":"x"}""")!;
        JsonNode b = JsonNode.Parse("""{"model":{"files":[{"name":"a","sha256":"11"},{"name":"b","sha256":"33"}]},"prompt":"x"}""")!;
        Assert.Equal("model.files[1].sha256: \"22\" vs \"33\"", JsonDifference.First(a, b));
        Assert.Null(JsonDifference.First(a, a.DeepClone()));
        Assert.Equal("extra: none vs 1", JsonDifference.First(JsonNode.Parse("{}"), JsonNode.Parse("""{"extra":1}""")));
        Assert.Equal("list: 1 items vs 2", JsonDifference.First(JsonNode.Parse("""{"list":[1]}"""), JsonNode.Parse("""{"list":[1,2]}""")));
    }
}
