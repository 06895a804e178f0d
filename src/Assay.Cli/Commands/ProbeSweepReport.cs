using System.Globalization;
using System.Text.Json.Nodes;
using Assay.Evaluation;
using Assay.Output;
using CsvHelper;
using ScottPlot;

namespace Assay.Cli.Commands;

/// <summary><c>assay probe --layers</c>: a probe per layer, written as a table, a plot, each layer's predictions and report.json.</summary>
internal static class ProbeSweepReport
{
    private static readonly CultureInfo Inv = CultureInfo.InvariantCulture;

    public static int Run(string trainRun, string testRun, string stem, IReadOnlyList<(int Layer, string Stem)> stems, ProbeKind kind, ProbeOptions options,
        (string[] Train, string[] Test)? types, ProbeMethods methods, string? difference, string output, TextWriter o, TextWriter err)
    {
        bool control = types != null;
        o.WriteLine(string.Create(Inv, $"sweeping {stems.Count} layers of {stem[..stem.IndexOf('.', StringComparison.Ordinal)]} ({stem[(stem.LastIndexOf('.') + 1)..]} pooling) with the {kind} probe, C by {options.Folds}-fold cross-validation"));
        o.WriteLine(control
            ? "layer          C   test accuracy (95 %)        log loss   control accuracy   selectivity"
            : "layer          C   test accuracy (95 %)        log loss");
        var search = SearchProgressPrinter.ForConsole(err);
        IReadOnlyList<LayerResult> results = LayerSweep.Run(trainRun, testRun, stems, kind, options,
            types is { } t ? (t.Train, t.Test) : null, methods.ControlSeed, new SynchronousProgress<LayerResult>(r =>
            {
                search.End();
                o.WriteLine(Line(r));
            }), search);
        int best = results.OrderByDescending(r => r.Test.Accuracy).ThenBy(r => r.Layer).First().Layer;
        o.WriteLine(string.Create(Inv, $"best test accuracy: layer {best} ({results.Single(r => r.Layer == best).Test.Accuracy:P2}); the choice is made on the test rows, so read it as a description, not a held-out score"));

        if (results[0].Control is { } c)
        {
            o.WriteLine(string.Create(Inv,
                $"control task (type = {methods.ControlKey}: {c.Types:N0} types in training, {c.UnseenTestRows:N0} test rows of unseen types): always its most frequent label scores {c.MajorityAccuracy:P2}, a lookup table of the training types {c.LookupAccuracy:P2}"));
        }
        RunFeatures test = RunFeatures.Load(testRun, stems[0].Stem);
        foreach (LayerResult r in results)
        {
            PredictionTable.Write(Path.Combine(output, ReportFolder.LayerPredictionsFile(r.Layer)), test.Ids, test.Labels, r.Classes, r.Probabilities);
        }
        WriteCsv(results, Path.Combine(output, ReportFolder.LayersTable));
        Plot(results, stem, kind, best).SavePng(Path.Combine(output, ReportFolder.LayersPlot), 1000, 520);
        var report = new JsonObject
        {
            ["feature"] = stem,
            ["probe_kind"] = kind.ToString(),
            ["train"] = new JsonObject { ["run"] = trainRun },
            ["test"] = new JsonObject { ["run"] = testRun },
            ["best_layer"] = best,
            ["layers"] = new JsonArray([.. results.Select(r => Layer(r, methods))]),
        };
        if (difference != null)
        {
            report["different_runs"] = difference;
        }
        Predictions.WriteJson(Path.Combine(output, ReportFolder.ReportFile), report);
        return 0;
    }

    private static string Line(LayerResult r)
    {
        string line = string.Create(Inv, $"{r.Layer,5}  {r.InverseRegularization,9:G4}   {r.Test.Accuracy,7:P2} ({r.Test.AccuracyLow:P1} – {r.Test.AccuracyHigh:P1})  {r.Test.LogLoss,8:F4}");
        return r.Control is { } c
            ? line + string.Create(Inv, $"   {c.Report.Accuracy,16:P2}   {100 * (r.Test.Accuracy - c.Report.Accuracy),+10:+0.00;-0.00;0.00} pt")
            : line;
    }

    private static JsonObject Layer(LayerResult r, ProbeMethods methods)
    {
        var layer = new JsonObject
        {
            ["layer"] = r.Layer,
            ["stem"] = r.Stem,
            ["c"] = r.InverseRegularization,
            ["predictions"] = ReportFolder.LayerPredictionsFile(r.Layer),
            ["test"] = r.Test.ToJson(r.Classes),
        };
        if (r.Control is { } c)
        {
            layer["control"] = c.ToJson(methods.ControlKey!, methods.ControlSeed, r.Test.Accuracy);
        }
        return layer;
    }

    private static void WriteCsv(IReadOnlyList<LayerResult> results, string path)
    {
        using var file = File.Create(path);
        using CsvWriter w = CsvWriter.Create(file, new CsvWriterOptions { NewLine = "\n" });
        string[] header = ["layer", "stem", "c", "accuracy", "accuracy_low", "accuracy_high", "log_loss", "macro_f1", "control_accuracy", "selectivity"];
        foreach (string h in header)
        {
            w.WriteField(h);
        }
        w.EndRecord();
        foreach (LayerResult r in results)
        {
            w.WriteField(r.Layer.ToString(Inv));
            w.WriteField(r.Stem);
            foreach (double v in new[] { r.InverseRegularization, r.Test.Accuracy, r.Test.AccuracyLow, r.Test.AccuracyHigh, r.Test.LogLoss, r.Test.MacroF1 })
            {
                w.WriteField(v.ToString("R", Inv));
            }
            w.WriteField(r.Control is { } c ? c.Report.Accuracy.ToString("R", Inv) : "");
            w.WriteField(r.Control is { } s ? (r.Test.Accuracy - s.Report.Accuracy).ToString("R", Inv) : "");
            w.EndRecord();
        }
    }

    /// <summary>Test accuracy against layer with its intervals; the control accuracy too when it was measured.</summary>
    private static Plot Plot(IReadOnlyList<LayerResult> results, string stem, ProbeKind kind, int best)
    {
        var plot = new Plot();
        plot.Font.Set(PlotStyle.FontName);
        double[] layers = [.. results.Select(r => (double)r.Layer)];
        AddSeries(plot, layers, [.. results.Select(r => r.Test)], 0, $"task ({kind} probe)");
        if (results.All(r => r.Control != null))
        {
            AddSeries(plot, layers, [.. results.Select(r => r.Control!.Report)], 1, "control task (same probe)");
        }
        var marker = plot.Add.VerticalLine(best);
        marker.LinePattern = LinePattern.Dotted;
        marker.Color = Colors.Gray;
        marker.Text = string.Create(Inv, $"best: layer {best}");
        marker.LabelOppositeAxis = true;
        plot.Axes.Bottom.TickGenerator = new ScottPlot.TickGenerators.NumericManual(layers, [.. layers.Select(l => l.ToString(Inv))]);
        plot.Title($"Test accuracy by layer — {stem[..stem.IndexOf('.', StringComparison.Ordinal)]}, {stem[(stem.LastIndexOf('.') + 1)..]} pooling");
        plot.XLabel("layer (0 = embeddings, last = after the final norm)");
        plot.YLabel("test accuracy (%)");
        plot.Axes.SetLimitsY(0, Math.Min(100, 1.2 * 100 * results.Max(r => Math.Max(r.Test.AccuracyHigh, r.Control?.Report.AccuracyHigh ?? 0))));
        plot.ShowLegend(Alignment.LowerRight);
        return plot;
    }

    private static void AddSeries(Plot plot, double[] layers, ClassificationReport[] scores, int series, string label)
    {
        double[] accuracy = [.. scores.Select(s => 100 * s.Accuracy)];
        var line = plot.Add.Scatter(layers, accuracy);
        line.Color = PlotStyle.Colour(series);
        line.MarkerShape = PlotStyle.Marker(series);
        line.MarkerSize = 8;
        line.LegendText = label;
        var bars = new ScottPlot.Plottables.ErrorBar(layers, accuracy, [.. layers.Select(_ => 0.0)], [.. layers.Select(_ => 0.0)],
            [.. scores.Select(s => 100 * (s.AccuracyHigh - s.Accuracy))], [.. scores.Select(s => 100 * (s.Accuracy - s.AccuracyLow))])
        {
            Color = PlotStyle.Colour(series),
        };
        plot.Add.Plottable(bars);
    }
}
