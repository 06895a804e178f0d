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
        var strengths = new Option<string>("--strengths") { Description = "Comma-separated C values to try (larger = weaker L2 penalty).", DefaultValueFactory = _ => string.Join(',', new ProbeOptions().Strengths.Select(c => c.ToString("R", CultureInfo.InvariantCulture))) };
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
            probe = LinearProbe.Fit(data.Values, data.Rows, data.Width, data.Labels, new ProbeOptions { Folds = folds, Strengths = grid });
            File.WriteAllText(Path.Combine(output, "probe.json"), probe.ToJson().ToJsonString(new JsonSerializerOptions { WriteIndented = true }) + "\n");
            report["train"] = new JsonObject { ["run"] = trainRun, ["rows"] = data.Rows, ["width"] = data.Width };
            o.WriteLine(string.Create(inv, $"fitted on {data.Rows:N0} rows × {data.Width} features of {feature}, {probe.Classes.Count} classes; C = {probe.Strength:G4} by {folds}-fold cross-validation"));
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
        report["c"] = probe.Strength;

        if (testRun != null)
        {
            RunFeatures data = RunFeatures.Load(testRun, feature);
            double[] p = probe.Predict(data.Values, data.Rows, data.Width);
            int k = probe.Classes.Count;
            var index = probe.Classes.Select((c, i) => (c, i)).ToDictionary(x => x.c, x => x.i, StringComparer.Ordinal);
            string? unknown = data.Labels.FirstOrDefault(l => !index.ContainsKey(l));
            if (unknown != null)
            {
                throw new ArgumentException($"{testRun}: label \"{unknown}\" is not one of the probe's classes");
            }
            int[] truth = [.. data.Labels.Select(l => index[l])];
            ProbeReport score = ProbeReport.Score(p, truth, k);
            WritePredictions(Path.Combine(output, "predictions.csv"), data, probe, p);
            var confusion = new JsonArray();
            for (int i = 0; i < k; i++)
            {
                confusion.Add(new JsonArray([.. Enumerable.Range(0, k).Select(j => JsonValue.Create(score.Confusion[i, j]))]));
            }
            report["test"] = new JsonObject
            {
                ["run"] = testRun,
                ["rows"] = score.Rows,
                ["accuracy"] = score.Accuracy,
                ["accuracy_95"] = new JsonArray(score.AccuracyLow, score.AccuracyHigh),
                ["log_loss"] = score.LogLoss,
                ["macro_f1"] = score.MacroF1,
                ["classes"] = new JsonArray([.. probe.Classes.Select(c => JsonValue.Create(c))]),
                ["confusion"] = confusion,
            };
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
