using System.Text.Json;
using Assay.Cli.Commands;
using Assay.Model;
using Assay.Output;
using Assay.Tests.Features;
using Assay.Tests.Output;
using Assay.Tests.Support;

namespace Assay.Tests.Evaluation;

public sealed class ProbeCommandTests
{
    [Fact]
    public void Report_metrics_equal_scikit_learn_on_the_written_predictions_and_a_saved_probe_predicts_the_same()
    {
        using var temp = new TempFolder();
        LanguageModel m = LanguageModel.Open(Checkpoints.Folder(FeatureExtractorTests.Spec));
        var options = new RunOptions { Extraction = new() { Features = [new Assay.Features.HiddenStateFeature(-1), new Assay.Features.ConditionalMeanFeature()] } };
        ExtractionRun.Execute(m, ExtractionRunTests.WriteInput(temp, 120, "train.jsonl"), temp.File("train"), options);
        ExtractionRun.Execute(m, ExtractionRunTests.WriteInput(temp, 40, "test.jsonl"), temp.File("test"), options);

        var o = new StringWriter();
        Assert.Equal(0, ProbeCommand.Run(temp.File("train"), null, temp.File("test"), "hidden.layer2.last", temp.File("probe"), 3, "0.01,1,100", o));
        Assert.Contains("C = ", o.ToString(), StringComparison.Ordinal);
        using JsonDocument report = JsonDocument.Parse(File.ReadAllBytes(temp.File("probe/report.json")));
        JsonElement test = report.RootElement.GetProperty("test");

        using JsonDocument sk = JsonDocument.Parse(PythonReference.Run("probe_metrics_sklearn.py", temp.File("probe/predictions.csv")));
        Assert.Equal(sk.RootElement.GetProperty("accuracy").GetDouble(), test.GetProperty("accuracy").GetDouble(), 12);
        Assert.Equal(sk.RootElement.GetProperty("macro_f1").GetDouble(), test.GetProperty("macro_f1").GetDouble(), 12);
        Assert.Equal(sk.RootElement.GetProperty("log_loss").GetDouble(), test.GetProperty("log_loss").GetDouble(), 9);
        Assert.Equal(sk.RootElement.GetProperty("confusion").GetRawText().Replace(" ", "", StringComparison.Ordinal),
            test.GetProperty("confusion").GetRawText().Replace(" ", "", StringComparison.Ordinal).Replace("\n", "", StringComparison.Ordinal));
        JsonElement ci = test.GetProperty("accuracy_95");
        Assert.InRange(test.GetProperty("accuracy").GetDouble(), ci[0].GetDouble(), ci[1].GetDouble());

        Assert.Equal(0, ProbeCommand.Run(null, temp.File("probe/probe.json"), temp.File("test"), "hidden.layer2.last", temp.File("applied"), 3, "1", TextWriter.Null));
        Assert.Equal(File.ReadAllBytes(temp.File("probe/predictions.csv")), File.ReadAllBytes(temp.File("applied/predictions.csv")));
    }

    [Fact]
    public void Bad_requests_name_the_problem()
    {
        using var temp = new TempFolder();
        Assert.Contains("give --train RUN", Assert.Throws<ArgumentException>(() =>
            ProbeCommand.Run(null, null, null, "cmean", temp.File("p"), 5, "1", TextWriter.Null)).Message, StringComparison.Ordinal);
        Assert.Contains("no finished run", Assert.Throws<RunFolderException>(() =>
            ProbeCommand.Run(temp.Path, null, null, "cmean", temp.File("p"), 5, "1", TextWriter.Null)).Message, StringComparison.Ordinal);
    }
}
