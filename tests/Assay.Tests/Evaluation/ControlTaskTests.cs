using System.Globalization;
using System.Text.Json;
using Assay.Evaluation;
using Assay.Fixtures;
using Assay.Model;
using Assay.Output;
using Assay.Tests.Features;
using Assay.Tests.Output;
using Assay.Tests.Support;

namespace Assay.Tests.Evaluation;

/// <summary>Control tasks and selectivity: labels against Python's hashlib and a χ² test (scipy), selectivity on tasks whose answer is known.</summary>
public sealed class ControlTaskTests
{
    [Fact]
    public void Control_labels_are_the_documented_function_of_type_and_seed_with_the_tasks_label_distribution()
    {
        // Skewed task labels (60 / 25 / 10 / 5 %) and 20,000 types, each met twice.
        string[] task = [.. Enumerable.Range(0, 1000).Select(i => i < 600 ? "noun" : i < 850 ? "verb" : i < 950 ? "adj" : "adv")];
        string[] types = [.. Enumerable.Range(0, 40_000).Select(i => "type" + (i % 20_000).ToString(CultureInfo.InvariantCulture) + (i % 7 == 0 ? "é" : ""))];
        string[] labels = ControlTask.Labels(types, task, seed: 11);
        using var temp = new TempFolder();
        File.WriteAllLines(temp.File("types.txt"), types);
        File.WriteAllLines(temp.File("task.txt"), task);
        File.WriteAllLines(temp.File("labels.txt"), labels);
        using JsonDocument py = JsonDocument.Parse(PythonReference.Run("control_labels_python.py", temp.File("types.txt"), temp.File("task.txt"), "11", temp.File("labels.txt")));
        Assert.Equal([.. py.RootElement.GetProperty("labels").EnumerateArray().Select(l => l.GetString()!)], labels);
        // One label per type, distributed as the task's: the χ² test does not reject at the 0.1 % level.
        double p = py.RootElement.GetProperty("p_value").GetDouble();
        Assert.True(p > 0.001, $"χ² p-value {p}");
        // Another seed, other labels; the same seed, the same.
        Assert.NotEqual(labels, ControlTask.Labels(types, task, seed: 12));
        Assert.Equal(labels, ControlTask.Labels(types, task, seed: 11));
    }

    [Theory]
    [InlineData(0)]
    [InlineData(16)]
    public void Features_that_encode_only_the_type_have_no_selectivity_and_features_of_the_label_have_task_minus_chance(int hidden)
    {
        // 30 types in 40 dimensions (so even a linear probe can memorize every type), 4 balanced task labels; a
        // type's rows share its task label (so task and control are both functions of the type). "type" features: a
        // random vector per type. "label" features: a vector per task label, with per-row types drawn independently.
        const int types = 30, classes = 4, d = 40;
        ProbeKind kind = hidden == 0 ? ProbeKind.Linear : ProbeKind.Mlp(hidden);
        var options = new ProbeOptions { Folds = 3, InverseRegularizations = [0.1, 1, 10] };

        (RunFeatures train, string[] trainTypes) = Synthetic(600, types, classes, d, byType: true, seed: 1);
        (RunFeatures test, string[] testTypes) = Synthetic(300, types, classes, d, byType: true, seed: 2);
        SelectivityResult typeOnly = ControlTask.Measure(train, trainTypes, test, testTypes, kind, options);
        Assert.True(typeOnly.Task.Accuracy > 0.9 && Math.Abs(typeOnly.Selectivity) < 0.1,
            $"type features: task {typeOnly.Task.Accuracy}, control {typeOnly.Control.Report.Accuracy}");

        (train, trainTypes) = Synthetic(600, types, classes, d, byType: false, seed: 3);
        (test, testTypes) = Synthetic(300, types, classes, d, byType: false, seed: 4);
        SelectivityResult labelOnly = ControlTask.Measure(train, trainTypes, test, testTypes, kind, options);
        // The control labels follow the task's balanced distribution: chance is 1/4, and a probe that cannot see the
        // type cannot beat it by more than noise.
        Assert.True(labelOnly.Task.Accuracy > 0.9 && Math.Abs(labelOnly.Selectivity - (labelOnly.Task.Accuracy - 0.25)) < 0.1,
            $"label features: task {labelOnly.Task.Accuracy}, control {labelOnly.Control.Report.Accuracy}");
        Assert.Equal(types, labelOnly.Control.Types);
        // Every test type was seen in training: a lookup table of the control labels is always right.
        Assert.Equal((0, 1.0), (labelOnly.Control.UnseenTestRows, labelOnly.Control.LookupAccuracy));
        Assert.Equal(kind, labelOnly.Kind);
    }

    [Fact]
    public void Types_come_from_the_runs_own_input_and_another_file_is_refused()
    {
        using var temp = new TempFolder();
        LanguageModel m = LanguageModel.Open(Checkpoints.Folder(FeatureExtractorTests.Spec));
        string input = ExtractionRunTests.WriteInput(temp, 12, "train.jsonl");
        ExtractionRun.Execute(m, input, temp.File("run"), new RunOptions { Extraction = new() { Features = [new Assay.Features.ConditionalMeanFeature()] } });
        // The accepted records' texts: the input also holds a malformed line and one without a text.
        string[] texts = [.. File.ReadAllLines(input).Where(l => l.Contains("\"text\"", StringComparison.Ordinal))
            .Select(l => JsonDocument.Parse(l).RootElement.GetProperty("text").GetString()!)];
        Assert.Equal(12, texts.Length);
        Assert.Equal(texts.Select(t => ControlTask.WordType(t, last: false)), ControlTask.Types(temp.File("run"), "first-word", input));
        Assert.Equal(RunFeatures.Load(temp.File("run"), "cmean").Ids, ControlTask.Types(temp.File("run"), "id", null));
        Assert.Equal(texts.Select(t => ControlTask.WordType(t, last: true)), ControlTask.Types(temp.File("run"), "last-word", input));

        string other = ExtractionRunTests.WriteInput(temp, 13, "other.jsonl");
        Assert.Contains("is not this run's input", Assert.Throws<RunFolderException>(() => ControlTask.Types(temp.File("run"), "first-word", other)).Message, StringComparison.Ordinal);
        Assert.Contains("give it", Assert.Throws<ArgumentException>(() => ControlTask.Types(temp.File("run"), "first-word", null)).Message, StringComparison.Ordinal);
        Assert.Contains("expected first-word", Assert.Throws<ArgumentException>(() => ControlTask.Types(temp.File("run"), "second-word", input)).Message, StringComparison.Ordinal);
        Assert.Contains("with a field \"topic\"", Assert.Throws<RunFolderException>(() => ControlTask.Types(temp.File("run"), "field:topic", input)).Message, StringComparison.Ordinal);
    }

    [Fact]
    public void Word_types_are_lower_cased_and_stripped_of_punctuation()
    {
        Assert.Equal("the", ControlTask.WordType("  \"The keeper, of it.", last: false));
        Assert.Equal("it", ControlTask.WordType("The keeper, of it.", last: true));
        Assert.Equal("...", ControlTask.WordType("...", last: false));
    }

    private static (RunFeatures Features, string[] Types) Synthetic(int rows, int types, int classes, int d, bool byType, ulong seed)
    {
        var rng = new DeterministicRandom(seed);
        var fixedRng = new DeterministicRandom(99);
        float[][] typeVectors = [.. Enumerable.Range(0, types).Select(_ => { float[] v = new float[d]; fixedRng.FillNormal(v, 1.0); return v; })];
        float[][] labelVectors = [.. Enumerable.Range(0, classes).Select(_ => { float[] v = new float[d]; fixedRng.FillNormal(v, 1.0); return v; })];
        double[] x = new double[rows * d];
        string[] labels = new string[rows], typeNames = new string[rows], ids = new string[rows];
        float[] noise = new float[d];
        for (int i = 0; i < rows; i++)
        {
            int type = (int)(rng.NextUInt64() % (ulong)types);
            int label = byType ? type % classes : (int)(rng.NextUInt64() % (ulong)classes);
            rng.FillNormal(noise, 0.3);
            float[] v = byType ? typeVectors[type] : labelVectors[label];
            for (int f = 0; f < d; f++)
            {
                x[(i * d) + f] = v[f] + noise[f];
            }
            labels[i] = "c" + label.ToString(CultureInfo.InvariantCulture);
            typeNames[i] = "t" + type.ToString(CultureInfo.InvariantCulture);
            ids[i] = i.ToString(CultureInfo.InvariantCulture);
        }
        return (new RunFeatures(x, rows, d, ids, labels), typeNames);
    }
}
