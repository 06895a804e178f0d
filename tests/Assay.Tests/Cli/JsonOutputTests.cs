using System.Text.Json;
using Assay.Cli.Commands;
using Assay.Evaluation;
using Assay.Input;
using Assay.Model;
using Assay.Tests.Features;
using Assay.Tests.Model;
using Assay.Tests.Output;
using Assay.Tests.Support;
using Assay.Weights;

namespace Assay.Tests.Cli;

/// <summary>--json on inspect, next and cross-entropy, and zero-shot's report folder: the same numbers as the text, machine-readable.</summary>
public sealed class JsonOutputTests
{
    private static readonly string Folder = Checkpoints.Folder(FeatureExtractorTests.Spec);

    [Fact]
    public void Next_json_lists_the_forward_pass_distribution()
    {
        var o = new StringWriter();
        Assert.Equal(0, NextCommand.Run(Folder, "abc def", 3, o, json: true));
        using JsonDocument doc = JsonDocument.Parse(o.ToString());
        LanguageModel m = LanguageModel.Open(Folder);
        int[] ids = m.Tokenizer.Encode("abc def");
        float[] p = new float[m.Config.VocabularySize];
        m.Forward([ids]).NextTokenProbabilities(0, p);
        JsonElement next = doc.RootElement.GetProperty("next");
        Assert.Equal(3, next.GetArrayLength());
        int best = Enumerable.Range(0, p.Length).MaxBy(i => p[i]);
        Assert.Equal(best, next[0].GetProperty("id").GetInt32());
        Assert.Equal(p[best], next[0].GetProperty("probability").GetSingle());
        Assert.Equal(ids.Length, doc.RootElement.GetProperty("tokens").GetInt32());
    }

    [Fact]
    public void The_model_commands_share_weights_and_threads_and_give_the_same_bits_with_any_thread_count()
    {
        // A BF16-exact comparison is not the point here: the options reach the model (bfloat16 changes the numbers,
        // the thread count does not).
        var one = new StringWriter();
        var all = new StringWriter();
        var half = new StringWriter();
        Assert.Equal(0, NextCommand.Run(Folder, "abc def", 5, one, json: true, new ModelRun(Threads: 1)));
        Assert.Equal(0, NextCommand.Run(Folder, "abc def", 5, all, json: true, new ModelRun(Threads: 0)));
        Assert.Equal(0, NextCommand.Run(Folder, "abc def", 5, half, json: true, new ModelRun(Weights: "bfloat16")));
        Assert.Equal(one.ToString(), all.ToString());
        Assert.NotEqual(one.ToString(), half.ToString());
    }

    [Fact]
    public void Cross_entropy_json_holds_the_scored_totals()
    {
        using var temp = new TempFolder();
        string input = ExtractionRunTests.WriteInput(temp, 10);
        var o = new StringWriter();
        Assert.Equal(0, CrossEntropyCommand.Run(Folder, input, null, InputFormat.Auto, "text", o, json: true));
        using JsonDocument doc = JsonDocument.Parse(o.ToString());
        using TextInputReader reader = TextInputReader.Open(input);
        CrossEntropyResult r = CrossEntropy.Score(LanguageModel.Open(Folder), [.. reader.Records().Where(x => x.Accepted).Select(x => x.Text!)]);
        Assert.Equal(r.Tokens, doc.RootElement.GetProperty("tokens").GetInt64());
        Assert.Equal(r.Nats, doc.RootElement.GetProperty("nats").GetDouble(), 12);
        Assert.Equal(2, doc.RootElement.GetProperty("rejected").GetInt64());
    }

    [Theory]
    [InlineData("odd-heads-width40")]
    [InlineData("untied-f16-width36")]
    [InlineData("width136-long")]
    public void Weight_memory_is_known_before_opening_for_every_storage(string name)
    {
        // The figure inspect prints must be what opening the model takes (counted by the loaded parameters).
        string folder = Checkpoints.Folder(ForwardParityTests.Cases[name].Spec);
        Assay.Config.ModelConfig config = Assay.Config.ModelConfig.Load(Path.Combine(folder, "config.json"));
        foreach (WeightPrecision p in Enum.GetValues<WeightPrecision>())
        {
            Assert.Equal(LanguageModel.Open(folder, p).WeightBytes, LanguageModel.WeightBytesFor(config, p));
        }
        var o = new StringWriter();
        Assert.Equal(0, InspectCommand.RunJson(folder, o));
        using JsonDocument doc = JsonDocument.Parse(o.ToString());
        Assert.Equal(LanguageModel.Open(folder, WeightPrecision.BFloat16).WeightBytes, doc.RootElement.GetProperty("weight_bytes").GetProperty("bfloat16").GetInt64());
        Assert.Equal(config.Layers + 1, doc.RootElement.GetProperty("hidden_layers").GetArrayLength());
        Assert.Equal($"hidden.layer{config.Layers}.mean.npy", doc.RootElement.GetProperty("outputs").GetProperty("hidden:mean")[0].GetString());
        Assert.True(doc.RootElement.GetProperty("check").GetProperty("ok").GetBoolean());
    }

    [Fact]
    public void Zero_shot_writes_the_report_shape_of_the_probe_and_its_predictions_score_alike_in_scikit_learn()
    {
        using var temp = new TempFolder();
        string input = ExtractionRunTests.WriteInput(temp, 30);
        File.WriteAllLines(temp.File("v.txt"), ["0: lamp, rope", "1: salt", "2: bell, tower", "3: oar"]);
        Assert.Equal(0, ZeroShotCommand.Run(Folder, input, temp.File("v.txt"), "{text} It is a", false, InputFormat.Auto, "text", "label", TextWriter.Null, temp.File("zs")));
        using JsonDocument report = JsonDocument.Parse(File.ReadAllBytes(temp.File("zs/report.json")));
        JsonElement test = report.RootElement.GetProperty("test");
        Assert.Equal(["input", "rows", "accuracy", "accuracy_95", "log_loss", "macro_f1", "classes", "confusion"], test.EnumerateObject().Select(p => p.Name));
        Assert.Equal(0.25, report.RootElement.GetProperty("chance_baseline").GetDouble());
        // scikit-learn's metrics on the written predictions equal the report's (Debian python3-sklearn).
        using JsonDocument sk = JsonDocument.Parse(PythonReference.Run("probe_metrics_sklearn.py", temp.File("zs/predictions.csv")));
        Assert.Equal(sk.RootElement.GetProperty("accuracy").GetDouble(), test.GetProperty("accuracy").GetDouble(), 12);
        Assert.Equal(sk.RootElement.GetProperty("log_loss").GetDouble(), test.GetProperty("log_loss").GetDouble(), 9);
        // The report folder rule, as for the probe.
        Assert.Throws<Assay.Output.RunFolderException>(() =>
            ZeroShotCommand.Run(Folder, input, temp.File("v.txt"), "{text} It is a", false, InputFormat.Auto, "text", "label", TextWriter.Null, temp.File("zs")));
    }
}
