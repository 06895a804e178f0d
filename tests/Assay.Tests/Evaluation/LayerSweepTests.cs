using System.Text.Json;
using Assay.Cli.Commands;
using Assay.Evaluation;
using Assay.Features;
using Assay.Model;
using Assay.Output;
using Assay.Tests.Features;
using Assay.Tests.Output;
using Assay.Tests.Support;

namespace Assay.Tests.Evaluation;

/// <summary>
/// <c>assay probe --layers</c>: one probe per layer, each the probe <c>assay probe</c> fits on that layer alone
/// (whose numbers are checked against scikit-learn in ProbeCommandTests), with the sweep's files.
/// </summary>
public sealed class LayerSweepTests
{
    [Fact]
    public void Every_layer_gets_the_probe_a_single_feature_gets_and_the_files_of_a_sweep()
    {
        using var temp = new TempFolder();
        LanguageModel m = LanguageModel.Open(Checkpoints.Folder(FeatureExtractorTests.Spec));
        var options = new RunOptions { Extraction = new() { Features = FeatureSpec.Parse("hidden:all:mean", m.Config.Layers, _ => []) } };
        ExtractionRun.Execute(m, ExtractionRunTests.WriteInput(temp, 90, "train.jsonl"), temp.File("train"), options);
        ExtractionRun.Execute(m, ExtractionRunTests.WriteInput(temp, 40, "test.jsonl"), temp.File("test"), options);

        var o = new StringWriter();
        Assert.Equal(0, ProbeCommand.Run(temp.File("train"), null, temp.File("test"), "hidden:mean", temp.File("sweep"), 3, "0.1,10", o,
            methods: new ProbeMethods(ControlKey: "id", Layers: "all")));
        using JsonDocument report = JsonDocument.Parse(File.ReadAllBytes(temp.File("sweep/report.json")));
        JsonElement layers = report.RootElement.GetProperty("layers");
        Assert.Equal(m.Config.Layers + 1, layers.GetArrayLength());
        double bestAccuracy = -1;
        int bestLayer = -1;
        for (int k = 0; k <= m.Config.Layers; k++)
        {
            Assert.Equal(0, ProbeCommand.Run(temp.File("train"), null, temp.File("test"), $"hidden.layer{k}.mean", temp.File($"one{k}"), 3, "0.1,10", TextWriter.Null));
            using JsonDocument one = JsonDocument.Parse(File.ReadAllBytes(temp.File($"one{k}/report.json")));
            JsonElement layer = layers[k];
            Assert.Equal(k, layer.GetProperty("layer").GetInt32());
            double accuracy = one.RootElement.GetProperty("test").GetProperty("accuracy").GetDouble();
            Assert.Equal(accuracy, layer.GetProperty("test").GetProperty("accuracy").GetDouble());
            Assert.Equal(one.RootElement.GetProperty("c").GetDouble(), layer.GetProperty("c").GetDouble());
            Assert.Equal(File.ReadAllBytes(temp.File($"one{k}/predictions.csv")), File.ReadAllBytes(temp.File($"sweep/predictions.layer{k}.csv")));
            // The fixture numbers both runs' ids from t0: every test id is a training type.
            Assert.Equal(0, layer.GetProperty("control").GetProperty("unseen_test_rows").GetInt32());
            Assert.Equal(1.0, layer.GetProperty("control").GetProperty("lookup_accuracy").GetDouble());
            if (accuracy > bestAccuracy)
            {
                (bestAccuracy, bestLayer) = (accuracy, k);
            }
        }
        Assert.Equal(bestLayer, report.RootElement.GetProperty("best_layer").GetInt32());
        Assert.Contains($"best test accuracy: layer {bestLayer}", o.ToString(), StringComparison.Ordinal);
        Assert.Equal(m.Config.Layers + 2, File.ReadAllLines(temp.File("sweep/layers.csv")).Length);
        byte[] png = File.ReadAllBytes(temp.File("sweep/layers.png"));
        Assert.Equal([0x89, (byte)'P', (byte)'N', (byte)'G'], png[..4]);

        // Two layers of the sweep compared on the same rows, from their predictions files.
        var json = new StringWriter();
        Assert.Equal(0, CompareCommand.Run(temp.File("sweep/predictions.layer0.csv"), temp.File("sweep/predictions.layer2.csv"), 200, 1, true, json));
        using JsonDocument compared = JsonDocument.Parse(json.ToString());
        Assert.Equal(layers[0].GetProperty("test").GetProperty("accuracy").GetDouble() - layers[2].GetProperty("test").GetProperty("accuracy").GetDouble(),
            compared.RootElement.GetProperty("accuracy").GetProperty("difference").GetDouble(), 12);

        // A rerun into the sweep's folder is a report folder like any other: refused without --overwrite, taken with it.
        Assert.Throws<RunFolderException>(() => ProbeCommand.Run(temp.File("train"), null, temp.File("test"), "hidden:mean", temp.File("sweep"), 3, "1", TextWriter.Null,
            methods: new ProbeMethods(Layers: "0,-1")));
        Assert.Equal(0, ProbeCommand.Run(temp.File("train"), null, temp.File("test"), "hidden:mean", temp.File("sweep"), 3, "1", TextWriter.Null, overwrite: true,
            methods: new ProbeMethods(Layers: "0,-1")));
        Assert.Equal(2, JsonDocument.Parse(File.ReadAllBytes(temp.File("sweep/report.json"))).RootElement.GetProperty("layers").GetArrayLength());
    }

    [Fact]
    public void A_sweep_of_what_is_not_a_hidden_state_or_a_layer_the_run_lacks_is_refused()
    {
        using var temp = new TempFolder();
        LanguageModel m = LanguageModel.Open(Checkpoints.Folder(FeatureExtractorTests.Spec));
        var options = new RunOptions { Extraction = new() { Features = [new HiddenStateFeature(-1), new ConditionalMeanFeature()] } };
        ExtractionRun.Execute(m, ExtractionRunTests.WriteInput(temp, 30, "train.jsonl"), temp.File("train"), options);
        Assert.Contains("is not one", Assert.Throws<ArgumentException>(() => ProbeCommand.Run(temp.File("train"), null, temp.File("train"), "cmean", temp.File("p"), 3, "1", TextWriter.Null,
            methods: new ProbeMethods(Layers: "all"))).Message, StringComparison.Ordinal);
        Assert.Contains("has no feature \"hidden.layer0.last\"", Assert.Throws<RunFolderException>(() => ProbeCommand.Run(temp.File("train"), null, temp.File("train"), "hidden", temp.File("p"), 3, "1", TextWriter.Null,
            methods: new ProbeMethods(Layers: "all"))).Message, StringComparison.Ordinal);
        Assert.Contains("\"7\" is not a layer", Assert.Throws<ArgumentException>(() => ProbeCommand.Run(temp.File("train"), null, temp.File("train"), "hidden", temp.File("p"), 3, "1", TextWriter.Null,
            methods: new ProbeMethods(Layers: "0,7"))).Message, StringComparison.Ordinal);
        Assert.Contains("give --train RUN and --test RUN", Assert.Throws<ArgumentException>(() => ProbeCommand.Run(temp.File("train"), null, null, "hidden", temp.File("p"), 3, "1", TextWriter.Null,
            methods: new ProbeMethods(Layers: "all"))).Message, StringComparison.Ordinal);
        Assert.False(Directory.Exists(temp.File("p")));
    }
}
