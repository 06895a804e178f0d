using Assay.Evaluation;
using Assay.Tests.Support;

namespace Assay.Tests.Evaluation;

/// <summary>Study files: a bad field is named with the file, before anything runs.</summary>
public sealed class StudySpecTests
{
    private const string Valid = """
        {
          "train": "train.jsonl", "test": "test.jsonl",
          "models": { "m": "model" },
          "prompts": { "p": "{text}" },
          "features": ["hidden", "cmean"]
        }
        """;

    private static TempFolder Folder()
    {
        var t = new TempFolder();
        File.WriteAllText(t.File("train.jsonl"), "");
        File.WriteAllText(t.File("test.jsonl"), "");
        Directory.CreateDirectory(t.File("model"));
        return t;
    }

    [Fact]
    public void A_valid_file_resolves_paths_beside_it_and_keeps_the_order()
    {
        using TempFolder t = Folder();
        File.WriteAllText(t.File("s.json"), Valid.Replace("\"models\": { \"m\": \"model\" }", "\"models\": { \"b\": \"model\", \"a\": \"model\" }", StringComparison.Ordinal));
        StudySpec s = StudySpec.Load(t.File("s.json"));
        Assert.Equal(t.File("train.jsonl"), s.Train);
        Assert.Equal(["b", "a"], s.Models.Select(m => m.Name));
        Assert.Equal(1, s.TrainEvery);
        Assert.Equal(new ProbeOptions().Folds, s.Probe.Folds);
    }

    [Fact]
    public void A_series_folder_gives_its_checkpoints_in_step_order_by_name_or_by_a_field()
    {
        using TempFolder t = Folder();
        foreach ((string name, int step) in new[] { ("ckpt-step-10", 300), ("ckpt-step-2", 100), ("ckpt-step-100", 200) })
        {
            Directory.CreateDirectory(t.File("run/" + name));
            File.WriteAllText(t.File($"run/{name}/config.json"), "{}");
            File.WriteAllText(t.File($"run/{name}/state.json"), $"{{\"global_step\": {step}}}");
        }
        Directory.CreateDirectory(t.File("run/logs")); // not a checkpoint: no config.json
        string series = Valid.Replace("\"models\": { \"m\": \"model\" },", "\"series\": { \"folder\": \"run\" },", StringComparison.Ordinal);
        File.WriteAllText(t.File("s.json"), series);
        StudySpec s = StudySpec.Load(t.File("s.json"));
        Assert.Equal(["step2", "step10", "step100"], s.Models.Select(m => m.Name));
        Assert.Equal(t.File("run/ckpt-step-2"), s.Models[0].Folder);

        File.WriteAllText(t.File("s.json"), series.Replace("\"folder\": \"run\"", "\"folder\": \"run\", \"step\": \"state.json:global_step\"", StringComparison.Ordinal));
        Assert.Equal([("step100", t.File("run/ckpt-step-2")), ("step200", t.File("run/ckpt-step-100")), ("step300", t.File("run/ckpt-step-10"))], StudySpec.Load(t.File("s.json")).Models);

        // With models too: the named models first, then the series.
        File.WriteAllText(t.File("s.json"), Valid.Replace("\"models\": { \"m\": \"model\" },", "\"models\": { \"m\": \"model\" }, \"series\": { \"folder\": \"run\" },", StringComparison.Ordinal));
        Assert.Equal(["m", "step2", "step10", "step100"], StudySpec.Load(t.File("s.json")).Models.Select(m => m.Name));
    }

    [Theory]
    [InlineData("{ \"folder\": \"run\", \"step\": \"state.json:missing\" }", "has no whole-number field \"missing\"")]
    [InlineData("{ \"folder\": \"run\", \"step\": \"epoch\" }", "series.step: \"epoch\" is neither name nor FILE:FIELD")]
    [InlineData("{ \"folder\": \"nowhere\" }", "series.folder: no such folder")]
    [InlineData("{ \"folder\": \"run\", \"order\": 1 }", "series: unknown field \"order\"")]
    [InlineData("\"run\"", "series: expected an object with a folder")]
    public void A_bad_series_is_named(string series, string expected)
    {
        using TempFolder t = Folder();
        Directory.CreateDirectory(t.File("run/final"));
        File.WriteAllText(t.File("run/final/config.json"), "{}");
        File.WriteAllText(t.File("run/final/state.json"), "{\"global_step\": 5}");
        File.WriteAllText(t.File("s.json"), Valid.Replace("\"models\": { \"m\": \"model\" },", $"\"series\": {series},", StringComparison.Ordinal));
        Assert.Contains(expected, Assert.Throws<StudyException>(() => StudySpec.Load(t.File("s.json"))).Message, StringComparison.Ordinal);
        // A checkpoint folder without a number in its name, read by name.
        File.WriteAllText(t.File("s.json"), Valid.Replace("\"models\": { \"m\": \"model\" },", "\"series\": { \"folder\": \"run\" },", StringComparison.Ordinal));
        Assert.Contains("has no step number in its name", Assert.Throws<StudyException>(() => StudySpec.Load(t.File("s.json"))).Message, StringComparison.Ordinal);
    }

    [Theory]
    [InlineData("\"features\": [\"hidden\", \"cmean\"]", "\"features\": [\"hidden\", \"logits\"]", "features: unknown kind \"logits\"")]
    [InlineData("\"features\": [\"hidden\", \"cmean\"]", "\"features\": [\"words\"]", "verbalizer: words and zero-shot need a verbalizer file")]
    [InlineData("\"features\": [\"hidden\", \"cmean\"]", "\"features\": [\"cmean\", \"cmean\"]", "listed twice")]
    [InlineData("\"m\": \"model\"", "\"m\": \"missing\"", "models.m: no such folder")]
    [InlineData("\"m\": \"model\"", "\"a b\": \"model\"", "models: name \"a b\"")]
    [InlineData("\"train\": \"train.jsonl\"", "\"train\": \"nope.jsonl\"", "train: no such file")]
    [InlineData("\"train\": \"train.jsonl\",", "\"train\": \"train.jsonl\", \"train_evry\": 2,", "unknown field \"train_evry\"")]
    [InlineData("\"train\": \"train.jsonl\",", "\"train\": \"train.jsonl\", \"train_every\": 0,", "train_every: expected a whole number ≥ 1")]
    [InlineData("\"train\": \"train.jsonl\",", "\"train\": \"train.jsonl\", \"strengths\": [0.1, -1],", "strengths: expected a non-empty list of positive numbers")]
    [InlineData("\"prompts\": { \"p\": \"{text}\" },", "\"prompts\": {},", "prompts: expected an object")]
    public void A_bad_field_is_named(string from, string to, string expected)
    {
        using TempFolder t = Folder();
        File.WriteAllText(t.File("s.json"), Valid.Replace(from, to, StringComparison.Ordinal));
        var e = Assert.Throws<StudyException>(() => StudySpec.Load(t.File("s.json")));
        Assert.StartsWith(t.File("s.json") + ": ", e.Message, StringComparison.Ordinal);
        Assert.Contains(expected, e.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void A_study_folder_with_foreign_files_or_parts_without_its_study_file_is_refused()
    {
        using TempFolder t = Folder();
        File.WriteAllText(t.File("s.json"), Valid);
        StudySpec spec = StudySpec.Load(t.File("s.json"));
        Directory.CreateDirectory(t.File("out"));
        File.WriteAllText(t.File("out/notes.txt"), "mine");
        Assert.Contains("not part of a study", Assert.Throws<StudyException>(() => Study.Run(spec, t.File("out"))).Message, StringComparison.Ordinal);
        Assert.Contains("not part of a study", Assert.Throws<StudyException>(() => Study.Run(spec, t.File("out"), overwrite: true)).Message, StringComparison.Ordinal);
        Assert.True(File.Exists(t.File("out/notes.txt")));

        File.Delete(t.File("out/notes.txt"));
        Directory.CreateDirectory(t.File("out/runs"));
        File.WriteAllText(t.File("out/results.md"), "old");
        Assert.Contains("without its study.json", Assert.Throws<StudyException>(() => Study.Run(spec, t.File("out"))).Message, StringComparison.Ordinal);

        // --overwrite starts over only once everything the study reads is checked: here the empty model folder stops
        // it first, and the old parts stay.
        Assert.Contains("config.json", Assert.ThrowsAny<InvalidInputException>(() => Study.Run(spec, t.File("out"), overwrite: true)).Message, StringComparison.Ordinal);
        Assert.True(File.Exists(t.File("out/results.md")));
        Assert.True(Directory.Exists(t.File("out/runs")));
        Assert.False(File.Exists(t.File("out/study.json")));
    }

    [Fact]
    public void Not_json_is_named()
    {
        using TempFolder t = Folder();
        File.WriteAllText(t.File("s.json"), "{ \"train\": ");
        Assert.Contains("not a JSON object", Assert.Throws<StudyException>(() => StudySpec.Load(t.File("s.json"))).Message, StringComparison.Ordinal);
    }

    [Fact]
    public void Every_model_folder_and_the_verbalizer_are_checked_before_anything_runs()
    {
        // Two good models and a broken third: the study stops at once, naming the third, with nothing written.
        using TempFolder t = Folder();
        string good = Checkpoints.Folder(Features.FeatureExtractorTests.Spec);
        File.WriteAllLines(t.File("train.jsonl"), Enumerable.Range(0, 20).Select(i => $"{{\"id\": \"r{i}\", \"text\": \"{Features.FeatureExtractorTests.Texts[i % Features.FeatureExtractorTests.Texts.Length]}\", \"label\": \"{i % 4}\"}}"));
        File.Copy(t.File("train.jsonl"), t.File("test.jsonl"), overwrite: true);
        string study = Valid.Replace("\"models\": { \"m\": \"model\" }", $"\"models\": {{ \"a\": \"{good}\", \"b\": \"{good}\", \"c\": \"model\" }}", StringComparison.Ordinal);
        File.WriteAllText(t.File("s.json"), study);
        var e = Assert.ThrowsAny<InvalidInputException>(() => Study.Run(StudySpec.Load(t.File("s.json")), t.File("out")));
        Assert.Contains(Path.Combine(t.File("model"), "config.json"), e.Message, StringComparison.Ordinal);
        Assert.Empty(Directory.EnumerateFileSystemEntries(t.File("out")));

        // A layer the models lack, and a verbalizer whose labels are not the task's (labels 0 … 3 here).
        File.WriteAllText(t.File("s.json"), study.Replace(", \"c\": \"model\"", "", StringComparison.Ordinal).Replace("[\"hidden\", \"cmean\"]", "[\"hidden:7\"]", StringComparison.Ordinal));
        Assert.Contains("features: hidden:7: model \"a\"", Assert.Throws<StudyException>(() => Study.Run(StudySpec.Load(t.File("s.json")), t.File("out"))).Message, StringComparison.Ordinal);
        File.WriteAllLines(t.File("v.txt"), ["0: lamp", "1: salt", "9: oar"]);
        File.WriteAllText(t.File("s.json"), study.Replace(", \"c\": \"model\"", "", StringComparison.Ordinal)
            .Replace("[\"hidden\", \"cmean\"]", "[\"zero-shot\"], \"verbalizer\": \"v.txt\"", StringComparison.Ordinal));
        Assert.Contains("the verbalizer's labels and the task's differ", Assert.Throws<StudyException>(() => Study.Run(StudySpec.Load(t.File("s.json")), t.File("out"))).Message, StringComparison.Ordinal);
        Assert.Empty(Directory.EnumerateFileSystemEntries(t.File("out")));
    }
}
