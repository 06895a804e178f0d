using System.Text.Json;
using Assay.Cli.Commands;
using Assay.Evaluation;
using Assay.Model;
using Assay.Output;
using Assay.Tests.Features;
using Assay.Tests.Output;
using Assay.Tests.Support;

namespace Assay.Tests.Evaluation;

/// <summary><c>assay compare</c> on two probes' report folders; the statistics themselves are checked against numpy in PairedComparisonTests.</summary>
public sealed class CompareCommandTests
{
    [Fact]
    public void Two_probes_on_the_same_test_rows_are_compared_and_other_rows_are_refused()
    {
        using var temp = new TempFolder();
        LanguageModel m = LanguageModel.Open(Checkpoints.Folder(FeatureExtractorTests.Spec));
        var options = new RunOptions { Extraction = new() { Features = [new Assay.Features.HiddenStateFeature(-1), new Assay.Features.ConditionalMeanFeature()] } };
        ExtractionRun.Execute(m, ExtractionRunTests.WriteInput(temp, 90, "train.jsonl"), temp.File("train"), options);
        ExtractionRun.Execute(m, ExtractionRunTests.WriteInput(temp, 40, "test.jsonl"), temp.File("test"), options);
        ExtractionRun.Execute(m, ExtractionRunTests.WriteInput(temp, 30, "other.jsonl"), temp.File("other"), options);
        Assert.Equal(0, ProbeCommand.Run(temp.File("train"), null, temp.File("test"), "hidden", temp.File("hidden"), 3, "0.1,10", TextWriter.Null));
        Assert.Equal(0, ProbeCommand.Run(temp.File("train"), null, temp.File("test"), "cmean", temp.File("cmean"), 3, "0.1,10", TextWriter.Null));
        Assert.Equal(0, ProbeCommand.Run(null, temp.File("hidden/probe.json"), temp.File("other"), "hidden", temp.File("other-hidden"), 3, "1", TextWriter.Null));

        var json = new StringWriter();
        Assert.Equal(0, CompareCommand.Run(temp.File("hidden"), temp.File("cmean"), 500, 2, json: true, json));
        using JsonDocument doc = JsonDocument.Parse(json.ToString());
        PredictionTable a = PredictionTable.Read(temp.File("hidden/predictions.csv"));
        PredictionTable b = PredictionTable.Read(temp.File("cmean/predictions.csv"));
        int[] truth = [.. a.Labels.Select(l => a.Classes.ToList().IndexOf(l))];
        PairedComparison expected = PairedComparison.Compare(a.Probabilities, b.Probabilities, truth, a.Classes.Count, 500, 2);
        JsonElement accuracy = doc.RootElement.GetProperty("accuracy");
        Assert.Equal(40, doc.RootElement.GetProperty("rows").GetInt32());
        Assert.Equal(expected.AccuracyDifference, accuracy.GetProperty("difference").GetDouble());
        Assert.Equal(expected.AccuracyLow, accuracy.GetProperty("difference_95")[0].GetDouble());
        Assert.Equal(expected.LogLossBBetter, doc.RootElement.GetProperty("log_loss").GetProperty("b_better").GetDouble());
        // The reports' own accuracies are the comparison's A and B.
        using JsonDocument report = JsonDocument.Parse(File.ReadAllBytes(temp.File("hidden/report.json")));
        Assert.Equal(report.RootElement.GetProperty("test").GetProperty("accuracy").GetDouble(), accuracy.GetProperty("a").GetDouble(), 12);

        var text = new StringWriter();
        Assert.Equal(0, CompareCommand.Run(temp.File("hidden"), temp.File("cmean"), 500, 2, json: false, text));
        Assert.Contains("(probe of hidden.layer2.last)", text.ToString(), StringComparison.Ordinal);
        Assert.Contains("40 test rows, 500 paired resamples", text.ToString(), StringComparison.Ordinal);

        Assert.Contains("the same test rows", Assert.Throws<ArgumentException>(() =>
            CompareCommand.Run(temp.File("hidden"), temp.File("other-hidden"), 500, 2, false, TextWriter.Null)).Message, StringComparison.Ordinal);
        Assert.Contains("no such predictions file", Assert.Throws<FileNotFoundException>(() =>
            CompareCommand.Run(temp.File("hidden"), temp.File("train"), 500, 2, false, TextWriter.Null)).Message, StringComparison.Ordinal);
        File.WriteAllText(temp.File("cmean/predictions.csv"), "id,label,predicted,p_a\n1,a,a,1.5\n");
        Assert.Contains("line 2: p_a \"1.5\" is not a probability", Assert.Throws<InputFileException>(() =>
            CompareCommand.Run(temp.File("hidden"), temp.File("cmean"), 500, 2, false, TextWriter.Null)).Message, StringComparison.Ordinal);
    }
}
