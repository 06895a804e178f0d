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
        var feature = new Option<string>("--feature") { Description = "Feature file stem, e.g. cmean or hidden.layer4.last.", Required = true };
        var output = new Option<DirectoryInfo>("--out", "-o") { Description = "Folder for probe.json, report.json and predictions.csv.", Required = true };
        var folds = new Option<int>("--folds") { Description = "Cross-validation folds.", DefaultValueFactory = _ => new ProbeOptions().Folds };
        var strengths = new Option<string>("--strengths") { Description = "Comma-separated C values to try (larger = weaker L2 penalty).", DefaultValueFactory = _ => string.Join(',', new ProbeOptions().InverseRegularizations.Select(c => c.ToString("R", CultureInfo.InvariantCulture))) };
        var command = new Command("probe", "Fit a linear probe (standardized multinomial logistic regression, C by cross-validation) on run-folder features, or apply a saved one, and report accuracy, log loss, macro-F1 and the confusion matrix.")
        {
            train, saved, test, feature, output, folds, strengths,
        };
        command.SetAction(r => CommandRunner.Run(() => Run(
            r.GetValue(train)?.FullName, r.GetValue(saved)?.FullName, r.GetValue(test)?.FullName, r.GetValue(feature)!,
            r.GetValue(output)!.FullName, r.GetValue(folds), r.GetValue(strengths)!, Console.Out)));
        return command;
    }

    internal static int Run(string? trainRun, string? savedProbe, string? testRun, string feature, string output, int folds, string strengths, TextWriter o)
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
            double.TryParse(s, NumberStyles.Float, CultureInfo.InvariantCulture, out double c) && c > 0 ? c
                : throw new ArgumentException($"--strengths: \"{s}\" is not a positive number"))];
        Directory.CreateDirectory(output);
        CultureInfo inv = CultureInfo.InvariantCulture;

        LinearProbe probe;
        var report = new JsonObject { ["feature"] = feature };
        if (trainRun != null)
        {
            RunFeatures data = RunFeatures.Load(trainRun, feature);
            probe = LinearProbe.Fit(data.Values, data.Rows, data.Width, data.Labels, new ProbeOptions { Folds = folds, InverseRegularizations = grid });
            File.WriteAllText(Path.Combine(output, "probe.json"), probe.ToJson().ToJsonString(new JsonSerializerOptions { WriteIndented = true }) + "\n");
            report["train"] = new JsonObject { ["run"] = trainRun, ["rows"] = data.Rows, ["width"] = data.Width };
            o.WriteLine(string.Create(inv, $"fitted on {data.Rows:N0} rows × {data.Width} features of {feature}, {probe.Classes.Count} classes; C = {probe.InverseRegularization:G4} by {folds}-fold cross-validation"));
            o.WriteLine("         C   cv log loss   cv accuracy");
            foreach ((double c, double loss, double accuracy) in probe.Search)
            {
                o.WriteLine(string.Create(inv, $"{c,10:G4}  {loss,12:F4}  {accuracy,12:P2}"));
            }
        }
        else
        {
            probe = LinearProbe.FromJson(savedProbe!);
            report["probe"] = savedProbe;
        }
        report["c"] = probe.InverseRegularization;

        if (testRun != null)
        {
            RunFeatures data = RunFeatures.Load(testRun, feature);
            ProbeScore scored = ProbeScorer.Score(probe, data, testRun);
            ClassificationReport score = scored.Report;
            WritePredictions(Path.Combine(output, "predictions.csv"), data, probe, scored.Probabilities);
            var tested = new JsonObject { ["run"] = testRun };
            foreach ((string key, JsonNode? value) in score.ToJson(probe.Classes))
            {
                tested[key] = value?.DeepClone();
            }
            report["test"] = tested;
            o.WriteLine(string.Create(inv,
                $"test: {score.Rows:N0} rows, accuracy {score.Accuracy:P2} (95 % bootstrap {score.AccuracyLow:P2} – {score.AccuracyHigh:P2}), log loss {score.LogLoss:F4}, macro-F1 {score.MacroF1:F4}"));
        }
        File.WriteAllText(Path.Combine(output, "report.json"), report.ToJsonString(new JsonSerializerOptions { WriteIndented = true }) + "\n");
        return 0;
    }

    private static void WritePredictions(string path, RunFeatures data, LinearProbe probe, double[] p)
    {
        int k = probe.Classes.Count;
        using var file = File.Create(path);
        using CsvWriter w = CsvWriter.Create(file, new CsvWriterOptions { NewLine = "\n" });
        w.WriteField("id");
        w.WriteField("label");
        w.WriteField("predicted");
        foreach (string c in probe.Classes)
        {
            w.WriteField("p_" + c);
        }
        w.EndRecord();
        for (int i = 0; i < data.Rows; i++)
        {
            ReadOnlySpan<double> row = p.AsSpan(i * k, k);
            w.WriteField(data.Ids[i]);
            w.WriteField(data.Labels[i]);
            w.WriteField(probe.Classes[LinearProbe.MostLikely(row)]);
            foreach (double v in row)
            {
                w.WriteField(v.ToString("R", CultureInfo.InvariantCulture));
            }
            w.EndRecord();
        }
    }
}
