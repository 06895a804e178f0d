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
