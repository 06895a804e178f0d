using System.Text.Json;
using Assay.Cli.Commands;
using Assay.Evaluation;
using Assay.Model;
using Assay.Output;
using Assay.Tests.Features;
using Assay.Tests.Output;
using Assay.Tests.Support;

namespace Assay.Tests.Evaluation;

/// <summary>
/// <c>assay probe --mlp, --control, --online-code</c> report what the library computes (whose numbers are checked
/// against scikit-learn, hashlib, scipy and numpy in MlpProbeTests, ControlTaskTests and OnlineCodeTests).
/// </summary>
public sealed class ProbeMethodsCommandTests
{
    [Fact]
    public void The_mlp_probe_control_task_and_online_code_are_reported_as_the_library_computes_them()
    {
        using var temp = new TempFolder();
        LanguageModel m = LanguageModel.Open(Checkpoints.Folder(FeatureExtractorTests.Spec));
        var options = new RunOptions { Extraction = new() { Features = [new Assay.Features.ConditionalMeanFeature()] } };
        string trainInput = ExtractionRunTests.WriteInput(temp, 90, "train.jsonl"), testInput = ExtractionRunTests.WriteInput(temp, 40, "test.jsonl");
        ExtractionRun.Execute(m, trainInput, temp.File("train"), options);
        ExtractionRun.Execute(m, testInput, temp.File("test"), options);

        var o = new StringWriter();
        Assert.Equal(0, ProbeCommand.Run(temp.File("train"), null, temp.File("test"), "cmean", temp.File("mlp"), 3, "0.1,10", o,
            methods: new ProbeMethods(MlpUnits: 8, ControlKey: "first-word", TrainInput: trainInput, TestInput: testInput, OnlineCode: true)));
        Assert.False(File.Exists(temp.File("mlp/probe.json")));
        using JsonDocument report = JsonDocument.Parse(File.ReadAllBytes(temp.File("mlp/report.json")));
        JsonElement r = report.RootElement;
        Assert.Equal("mlp:8", r.GetProperty("probe_kind").GetString());

        RunFeatures train = RunFeatures.Load(temp.File("train"), "cmean"), test = RunFeatures.Load(temp.File("test"), "cmean");
        var probeOptions = new ProbeOptions { Folds = 3, InverseRegularizations = [0.1, 10] };
        MlpProbe mlp = MlpProbe.Fit(train.Values, train.Rows, train.Width, train.Labels, probeOptions, 8);
        Assert.Equal(mlp.InverseRegularization, r.GetProperty("c").GetDouble());
        Assert.Equal(ProbeScorer.Score(mlp, test, temp.File("test")).Report.Accuracy, r.GetProperty("test").GetProperty("accuracy").GetDouble());

        ControlFit control = ControlTask.FitControl(train, ControlTask.Types(temp.File("train"), "first-word", trainInput),
            test, ControlTask.Types(temp.File("test"), "first-word", testInput), ProbeKind.Mlp(8), probeOptions);
        JsonElement c = r.GetProperty("control");
        Assert.Equal(control.Report.Accuracy, c.GetProperty("accuracy").GetDouble());
        Assert.Equal(control.Types, c.GetProperty("training_types").GetInt32());
        Assert.Equal(control.LookupAccuracy, c.GetProperty("lookup_accuracy").GetDouble());
        Assert.Equal(control.MajorityAccuracy, c.GetProperty("majority_accuracy").GetDouble());
        Assert.InRange(control.MajorityAccuracy, 0, control.LookupAccuracy);
        Assert.Equal(r.GetProperty("test").GetProperty("accuracy").GetDouble() - control.Report.Accuracy, c.GetProperty("selectivity").GetDouble(), 15);
        Assert.Contains("selectivity: ", o.ToString(), StringComparison.Ordinal);

        OnlineCodeResult code = OnlineCode.Measure(train.Values, train.Rows, train.Width, train.Labels, ProbeKind.Mlp(8), mlp.InverseRegularization);
        Assert.Equal(code.CodelengthBits, r.GetProperty("online_code").GetProperty("codelength_bits").GetDouble());
        Assert.Equal(code.Compression, r.GetProperty("online_code").GetProperty("compression").GetDouble());
        Assert.Equal(OnlineCode.BlockEnds(90).Length, r.GetProperty("online_code").GetProperty("blocks").GetArrayLength());
    }

    [Fact]
    public void Requests_that_cannot_be_met_are_refused_before_the_output_folder_is_touched()
    {
        using var temp = new TempFolder();
        LanguageModel m = LanguageModel.Open(Checkpoints.Folder(FeatureExtractorTests.Spec));
        var options = new RunOptions { Extraction = new() { Features = [new Assay.Features.ConditionalMeanFeature()] } };
        string trainInput = ExtractionRunTests.WriteInput(temp, 30, "train.jsonl"), testInput = ExtractionRunTests.WriteInput(temp, 12, "test.jsonl");
        ExtractionRun.Execute(m, trainInput, temp.File("train"), options);
        ExtractionRun.Execute(m, testInput, temp.File("test"), options);
        string train = temp.File("train"), test = temp.File("test"), output = temp.File("p");

        Assert.Contains("give it", Assert.Throws<ArgumentException>(() => ProbeCommand.Run(train, null, test, "cmean", output, 3, "1", TextWriter.Null,
            methods: new ProbeMethods(ControlKey: "first-word"))).Message, StringComparison.Ordinal);
        Assert.Contains("is not this run's input", Assert.Throws<RunFolderException>(() => ProbeCommand.Run(train, null, test, "cmean", output, 3, "1", TextWriter.Null,
            methods: new ProbeMethods(ControlKey: "first-word", TrainInput: testInput, TestInput: testInput))).Message, StringComparison.Ordinal);
        Assert.Contains("give --test RUN too", Assert.Throws<ArgumentException>(() => ProbeCommand.Run(train, null, null, "cmean", output, 3, "1", TextWriter.Null,
            methods: new ProbeMethods(ControlKey: "id"))).Message, StringComparison.Ordinal);
        Assert.Contains("give --control KEY", Assert.Throws<ArgumentException>(() => ProbeCommand.Run(train, null, test, "cmean", output, 3, "1", TextWriter.Null,
            methods: new ProbeMethods(TrainInput: trainInput))).Message, StringComparison.Ordinal);
        Assert.Contains("--mlp -1", Assert.Throws<ArgumentException>(() => ProbeCommand.Run(train, null, test, "cmean", output, 3, "1", TextWriter.Null,
            methods: new ProbeMethods(MlpUnits: -1))).Message, StringComparison.Ordinal);
        Assert.False(Directory.Exists(output));

        Assert.Equal(0, ProbeCommand.Run(train, null, test, "cmean", output, 3, "1", TextWriter.Null));
        Assert.Contains("not --probe", Assert.Throws<ArgumentException>(() => ProbeCommand.Run(null, temp.File("p/probe.json"), test, "cmean", temp.File("q"), 3, "1", TextWriter.Null,
            methods: new ProbeMethods(OnlineCode: true))).Message, StringComparison.Ordinal);
    }
}
