using Assay.Cli.Commands;
using Assay.Input;
using Assay.Tests.Features;
using Assay.Tests.Output;
using Assay.Tests.Support;

namespace Assay.Tests.Cli;

/// <summary>The long commands report progress on stderr (texts done, tokens, tokens/s, an ETA), ending on the final count.</summary>
public sealed class ProgressTests
{
    private static readonly string Folder = Checkpoints.Folder(FeatureExtractorTests.Spec);

    [Fact]
    public void Zero_shot_and_cross_entropy_end_on_their_totals()
    {
        using var temp = new TempFolder();
        string input = ExtractionRunTests.WriteInput(temp, 30);
        File.WriteAllLines(temp.File("v.txt"), ["0: lamp", "1: salt", "2: bell", "3: oar"]);

        var err = new StringWriter();
        Assert.Equal(0, ZeroShotCommand.Run(Folder, input, temp.File("v.txt"), "{text} It is a", false, InputFormat.Auto, "text", "label", TextWriter.Null, err: err));
        string last = err.ToString().TrimEnd().Split('\n')[^1];
        Assert.StartsWith("assay: 30 of 30 texts, ", last, StringComparison.Ordinal);
        Assert.Contains(" tokens/s, ", last, StringComparison.Ordinal);

        err = new StringWriter();
        var o = new StringWriter();
        Assert.Equal(0, CrossEntropyCommand.Run(Folder, input, null, InputFormat.Auto, "text", o, json: true, err: err));
        last = err.ToString().TrimEnd().Split('\n')[^1];
        Assert.StartsWith("assay: 30 texts, 100 % of input, ", last, StringComparison.Ordinal);
        Assert.EndsWith("input read", last, StringComparison.Ordinal);
        // The progress line and the summary count the same tokens: tokens_run = predicted + one end-of-text token per
        // text + the windows' overlap on texts longer than this fixture's context.
        using var summary = System.Text.Json.JsonDocument.Parse(o.ToString());
        long run = summary.RootElement.GetProperty("tokens_run").GetInt64();
        Assert.True(run >= summary.RootElement.GetProperty("tokens").GetInt64() + 30, o.ToString());
        Assert.Contains(string.Create(System.Globalization.CultureInfo.InvariantCulture, $", {run:N0} tokens, "), last, StringComparison.Ordinal);
    }

    [Fact]
    public void The_probe_reports_its_search_for_c()
    {
        using var temp = new TempFolder();
        var options = new Assay.Output.RunOptions();
        Assay.Model.LanguageModel m = Assay.Model.LanguageModel.Open(Folder);
        Assay.Output.ExtractionRun.Execute(m, ExtractionRunTests.WriteInput(temp, 60, "train.jsonl"), temp.File("train"), options);
        var err = new StringWriter();
        Assert.Equal(0, ProbeCommand.Run(temp.File("train"), null, null, "cmean", temp.File("p"), 3, "0.1,1,10", TextWriter.Null, err: err));
        string last = err.ToString().TrimEnd().Split('\n')[^1];
        Assert.StartsWith("assay: C 3 of 3 cross-validated (C = 10: log loss ", last, StringComparison.Ordinal);
        Assert.EndsWith("refitting on all rows", last, StringComparison.Ordinal);
    }

    [Fact]
    public void The_study_line_names_the_step_its_units_the_rate_and_the_step_eta()
    {
        var err = new StringWriter();
        var printer = new StudyProgressPrinter(err, interactive: false, TimeSpan.Zero);
        printer.Report(new Assay.Evaluation.StudyProgress(3, 40, "final/kind-of/train", 1_000, 4_000, "rows", 20_000, TimeSpan.FromSeconds(10)));
        // 2,000 tokens/s; a quarter done in 10 s leaves 30 s.
        Assert.Equal("assay: step 3 of 40 (final/kind-of/train): 1,000 of 4,000 rows, 2,000 tokens/s, 0:00:10 elapsed, step ETA 0:00:30", err.ToString().TrimEnd());
    }
}
