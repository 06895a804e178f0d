using Assay.Evaluation;
using Assay.Tests.Support;

namespace Assay.Tests.Evaluation;

/// <summary>
/// A study file edited after a run keeps the parts whose inputs did not change and computes the others again; the
/// result equals a fresh study of the edited file; the study reports its steps as it goes.
/// </summary>
public sealed class StudyEditTests : IDisposable
{
    private readonly TempFolder _t = new();

    public StudyEditTests()
    {
        string[] texts = Features.FeatureExtractorTests.Texts;
        File.WriteAllLines(_t.File("train.jsonl"), Enumerable.Range(0, 24).Select(i => $"{{\"id\": \"r{i}\", \"text\": \"{texts[i % texts.Length]} {i}\", \"label\": \"{i % 3}\"}}"));
        File.WriteAllLines(_t.File("test.jsonl"), Enumerable.Range(0, 9).Select(i => $"{{\"id\": \"t{i}\", \"text\": \"{texts[(i + 2) % texts.Length]}\", \"label\": \"{i % 3}\"}}"));
        Write(Study("[\"hidden\", \"cmean\"]", "[0.1]"));
    }

    public void Dispose() => _t.Dispose();

    private string SpecFile => _t.File("s.json");

    private static string Study(string features, string strengths) => $$"""
        {
          "train": "train.jsonl", "test": "test.jsonl",
          "models": { "m": "{{Checkpoints.Folder(Features.FeatureExtractorTests.Spec)}}" },
          "prompts": { "p": "{text} is" },
          "features": {{features}},
          "folds": 2, "strengths": {{strengths}}
        }
        """;

    private void Write(string study) => File.WriteAllText(SpecFile, study);

    private (StudyResult Result, List<string> Log, List<StudyProgress> Progress) Run(string folder, string? specFile = null)
    {
        var log = new List<string>();
        var progress = new List<StudyProgress>();
        StudyResult r = Assay.Evaluation.Study.Run(StudySpec.Load(specFile ?? SpecFile), folder, log: new Sink<string>(log), progress: new Sink<StudyProgress>(progress));
        return (r, log, progress);
    }

    private static bool Kept(List<string> log, string step) => log.Single(l => l.StartsWith(step + ": ", StringComparison.Ordinal)).EndsWith("(kept from an earlier run)", StringComparison.Ordinal);

    [Fact]
    public void An_edited_study_keeps_the_unchanged_cells_and_equals_a_fresh_study_of_the_edit()
    {
        string folder = _t.File("out");
        (_, List<string> first, _) = Run(folder);
        Assert.False(Kept(first, "m/p/hidden"));

        // A feature added: the runs are extracted again (their feature set changed), but the two cells and the
        // cross-entropy, whose inputs are the same, are kept; the new cell is computed.
        Write(Study("[\"hidden\", \"cmean\", \"hidden:0\"]", "[0.1]"));
        (StudyResult added, List<string> log, _) = Run(folder);
        Assert.Contains(log, l => l.Contains("has changed since this folder was made", StringComparison.Ordinal));
        Assert.True(Kept(log, "m"));
        Assert.True(Kept(log, "m/p/hidden"));
        Assert.True(Kept(log, "m/p/cmean"));
        Assert.False(Kept(log, "m/p/hidden:0"));
        Assert.DoesNotContain(log, l => l.StartsWith("m/p/train", StringComparison.Ordinal) && l.Contains("already extracted", StringComparison.Ordinal));

        // The probe's strengths changed: every probe cell is fitted again, the runs and the cross-entropy stay.
        Write(Study("[\"hidden\", \"cmean\", \"hidden:0\"]", "[0.1, 10]"));
        (StudyResult strengths, log, _) = Run(folder);
        Assert.True(Kept(log, "m"));
        Assert.Contains(log, l => l.StartsWith("m/p/train", StringComparison.Ordinal) && l.Contains("already extracted", StringComparison.Ordinal));
        Assert.False(Kept(log, "m/p/hidden") || Kept(log, "m/p/cmean") || Kept(log, "m/p/hidden:0"));

        // A fresh study of the final file, in another folder, gives the same cells as the edited one.
        (StudyResult fresh, _, _) = Run(_t.File("fresh"));
        Assert.Equal(fresh.Cells.Select(c => (c.Feature, c.InverseRegularization, c.Score.Accuracy, c.Score.LogLoss)),
            strengths.Cells.Select(c => (c.Feature, c.InverseRegularization, c.Score.Accuracy, c.Score.LogLoss)));
        Assert.Equal(added.Cells.Single(c => c.Feature == "hidden").Score.Accuracy, Cell(strengths, "hidden").Score.Accuracy);
    }

    [Fact]
    public void A_changed_task_file_makes_the_data_runs_and_cells_again()
    {
        string folder = _t.File("out");
        Run(folder);
        File.AppendAllLines(_t.File("test.jsonl"), ["{\"id\": \"t9\", \"text\": \"one more\", \"label\": \"1\"}"]);
        (StudyResult r, List<string> log, _) = Run(folder);
        Assert.False(Kept(log, "m") || Kept(log, "m/p/hidden") || Kept(log, "m/p/cmean"));
        Assert.Equal(10, Cell(r, "hidden").Score.Rows);
    }

    [Fact]
    public void Another_study_file_on_the_same_folder_is_still_refused()
    {
        string folder = _t.File("out");
        Run(folder);
        File.WriteAllText(_t.File("other.json"), Study("[\"hidden\"]", "[0.1]"));
        var e = Assert.Throws<StudyException>(() => Run(folder, _t.File("other.json")));
        Assert.Contains("another study file", e.Message, StringComparison.Ordinal);
        Assert.Contains(SpecFile, e.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void The_study_reports_every_step_with_its_units()
    {
        (_, _, List<StudyProgress> progress) = Run(_t.File("out"));
        // 1 model × (cross-entropy + 1 prompt × (2 runs + 2 cells)) = 5 steps.
        Assert.All(progress, p => Assert.Equal(5, p.Count));
        Assert.Equal(progress.Select(p => p.Index).Order(), progress.Select(p => p.Index));
        Assert.All(progress, p => Assert.InRange(p.Done, 0, p.Total));
        StudyProgress ce = progress.Last(p => p.Step == "m/cross-entropy"), train = progress.Last(p => p.Step == "m/p/train"), search = progress.Last(p => p.Step == "m/p/hidden");
        Assert.Equal((9L, 9L, "texts"), (ce.Done, ce.Total, ce.Unit));
        Assert.Equal((24L, 24L, "rows"), (train.Done, train.Total, train.Unit));
        Assert.True(train.Tokens > 24, $"{train.Tokens} tokens");
        Assert.Equal((1L, 1L, "C values"), (search.Done, search.Total, search.Unit));
    }

    private static StudyCell Cell(StudyResult r, string feature) => r.Cells.Single(c => c.Feature == feature);
}
