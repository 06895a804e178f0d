using System.CommandLine;
using System.Globalization;
using System.Text.Json;
using System.Text.Json.Nodes;
using Assay.Evaluation;
using Assay.Output;
using CsvHelper;

namespace Assay.Cli.Commands;

/// <summary>
/// <c>assay probe --train RUN --feature F [--test RUN] --out DIR</c>: fits a linear probe on one feature of a run
/// folder (C chosen by cross-validation) and scores it on a test run; <c>--probe DIR/probe.json</c> applies a saved
/// probe instead of fitting one.
/// </summary>
internal static class ProbeCommand
{
    public static Command Create()
    {
        var train = new Option<DirectoryInfo>("--train") { Description = "Run folder to fit the probe on (its rows.csv labels are the classes)." };
        var saved = new Option<FileInfo>("--probe") { Description = "A probe.json written by an earlier fit, to apply instead of fitting." };
        var test = new Option<DirectoryInfo>("--test") { Description = "Run folder to score the probe on." };
        var feature = new Option<string>("--feature") { Description = "The feature, as --features names it (hidden:4, hidden:mean, cmean, topk:5) or by its file stem (hidden.layer4.last).", Required = true };
        var output = new Option<DirectoryInfo>("--out", "-o") { Description = "Folder for probe.json, report.json and predictions.csv.", Required = true };
        var folds = new Option<int>("--folds") { Description = "Cross-validation folds.", DefaultValueFactory = _ => new ProbeOptions().Folds };
        var strengths = new Option<string>("--strengths") { Description = "Comma-separated C values to try (larger = weaker L2 penalty).", DefaultValueFactory = _ => string.Join(',', new ProbeOptions().InverseRegularizations.Select(c => c.ToString("R", CultureInfo.InvariantCulture))) };
        var allow = new Option<bool>("--allow-different-runs") { Description = "Compare runs extracted differently (another checkpoint, prompt or storage) on purpose; the report records the difference." };
        var overwrite = new Option<bool>("--overwrite") { Description = "Replace an earlier report in the output folder." };
        var command = new Command("probe", "Fit a linear probe (standardized multinomial logistic regression, C by cross-validation) on run-folder features, or apply a saved one, and report accuracy, log loss, macro-F1 and the confusion matrix.")
        {
            train, saved, test, feature, output, folds, strengths, allow, overwrite,
        };
        command.SetAction(r => CommandRunner.Run(() => Run(
            r.GetValue(train)?.FullName, r.GetValue(saved)?.FullName, r.GetValue(test)?.FullName, r.GetValue(feature)!,
            r.GetValue(output)!.FullName, r.GetValue(folds), r.GetValue(strengths)!, Console.Out, r.GetValue(allow), r.GetValue(overwrite), Console.Error)));
        return command;
    }

    internal static int Run(string? trainRun, string? savedProbe, string? testRun, string feature, string output, int folds, string strengths, TextWriter o,
        bool allowDifferentRuns = false, bool overwrite = false, TextWriter? err = null)
    {
        if ((trainRun == null) == (savedProbe == null))
        {
            throw new ArgumentException("give --train RUN to fit a probe, or --probe FILE to apply a saved one");
        }
        if (savedProbe != null && testRun == null)
        {
            throw new ArgumentException("--probe needs --test RUN to apply it to");
        }
        double[] grid = [.. strengths.Split(',', StringSplitOptions.TrimEntries | StringSplitOptions.RemoveEmptyEntries).Select(s =>
            double.TryParse(s, NumberStyles.Float, CultureInfo.InvariantCulture, out double c) && c > 0 && double.IsFinite(c) ? c
                : throw new ArgumentException($"--strengths: \"{s}\" is not a positive number"))];
        if (grid.Length == 0)
        {
            throw new ArgumentException("--strengths: no values of C to try; give at least one");
        }
        if (folds < 2)
        {
            throw new ArgumentException($"--folds {folds}: cross-validation needs at least 2 folds");
        }
        var fitOptions = new ProbeOptions { Folds = folds, InverseRegularizations = grid };
        CultureInfo inv = CultureInfo.InvariantCulture;
        err ??= TextWriter.Null;

        // Everything is checked before the output folder is touched.
        RunRecord? trainRecord = trainRun == null ? null : RunRecord.Read(trainRun);
        RunRecord? testRecord = testRun == null ? null : RunRecord.Read(testRun);
        string stem = RunFeatures.Resolve(trainRun ?? testRun!, feature);
        string? difference = null;
        if (trainRecord != null && testRecord != null)
        {
            difference = trainRecord.FirstValueDifference(testRecord);
            if (difference != null && !allowDifferentRuns)
            {
                throw new ArgumentException($"--train {trainRun} and --test {testRun} were extracted differently ({difference}); a probe fitted on one does not measure the other. Pass --allow-different-runs to compare them on purpose");
            }
        }
        SavedProbe? saved = savedProbe == null ? null : SavedProbe.Load(savedProbe);
        if (saved != null)
        {
            // The width from the record: the features themselves are read once, below.
            int width = testRecord!.Files.First(f => f.File == stem + ".npy").Width;
            difference = saved.Mismatch(stem, width, testRecord);
            bool runsOnly = difference != null && difference.StartsWith("the probe's training run", StringComparison.Ordinal);
            if (difference != null && !(runsOnly && allowDifferentRuns))
            {
                throw new ArgumentException($"--probe {savedProbe} on --test {testRun}: {difference}{(runsOnly ? "; pass --allow-different-runs to apply it on purpose" : "")}");
            }
        }
        if (difference != null)
        {
            err.WriteLine($"assay: comparing different runs on purpose: {difference}");
        }
        using Assay.Output.FolderLock folderLock = ReportFolder.Claim(output, overwrite);

        LinearProbe probe;
        var report = new JsonObject { ["feature"] = stem };
        if (difference != null)
        {
            report["different_runs"] = difference;
        }
        string[]? trainLabels = null;
        if (trainRun != null)
        {
            RunFeatures data = RunFeatures.Load(trainRun, stem);
            var search = SearchProgressPrinter.ForConsole(err);
            probe = LinearProbe.Fit(data.Values, data.Rows, data.Width, data.Labels, fitOptions, search);
            search.End();
            SavedProbe.Create(probe, stem, data.Width, trainRecord!).Save(Path.Combine(output, ReportFolder.ProbeFile));
            trainLabels = [.. data.Labels];
            report["train"] = new JsonObject { ["run"] = trainRun, ["rows"] = data.Rows, ["width"] = data.Width };
            o.WriteLine(string.Create(inv, $"fitted on {data.Rows:N0} rows × {data.Width} features of {stem}, {probe.Classes.Count} classes; C = {probe.InverseRegularization:G4} by {folds}-fold cross-validation"));
            o.WriteLine("         C   cv log loss   cv accuracy");
            foreach ((double c, double loss, double accuracy) in probe.Search)
            {
                o.WriteLine(string.Create(inv, $"{c,10:G4}  {loss,12:F4}  {accuracy,12:P2}"));
            }
        }
        else
        {
            probe = saved!.Probe;
            report["probe"] = savedProbe;
        }
        report["c"] = probe.InverseRegularization;

        if (testRun != null)
        {
            RunFeatures data = RunFeatures.Load(testRun, stem);
            ProbeScore scored = ProbeScorer.Score(probe, data, testRun);
            ClassificationReport score = scored.Report;
            PredictionTable.Write(Path.Combine(output, ReportFolder.PredictionsFile), data.Ids, data.Labels, probe.Classes, scored.Probabilities);
            var tested = new JsonObject { ["run"] = testRun };
            foreach ((string key, JsonNode? value) in score.ToJson(probe.Classes))
            {
                tested[key] = value?.DeepClone();
            }
            report["test"] = tested;
            o.WriteLine(string.Create(inv,
                $"test: {score.Rows:N0} rows, accuracy {score.Accuracy:P2} (95 % bootstrap {score.AccuracyLow:P2} – {score.AccuracyHigh:P2}), log loss {score.LogLoss:F4}, macro-F1 {score.MacroF1:F4}"));
            if (trainLabels != null)
            {
                // The baseline without features: always the training set's most frequent class.
                string majority = trainLabels.GroupBy(l => l, StringComparer.Ordinal).OrderByDescending(g => g.Count()).ThenBy(g => g.Key, StringComparer.Ordinal).First().Key;
                double accuracy = data.Labels.Count(l => l == majority) / (double)data.Rows;
                report["majority_baseline"] = new JsonObject { ["class"] = majority, ["accuracy"] = accuracy };
                o.WriteLine(string.Create(inv, $"majority baseline: {accuracy:P2} (always \"{majority}\", the training set's most frequent class)"));
            }
        }
        Predictions.WriteJson(Path.Combine(output, ReportFolder.ReportFile), report);
        return 0;
    }

}
