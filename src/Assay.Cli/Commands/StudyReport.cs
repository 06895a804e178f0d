using System.Globalization;
using System.Text;
using Assay.Evaluation;
using CsvHelper;
using ScottPlot;

namespace Assay.Cli.Commands;

/// <summary>The study's tables (Markdown, CSV) and plots (PNG, drawn with ScottPlot).</summary>
internal static class StudyReport
{
    private static readonly CultureInfo Inv = CultureInfo.InvariantCulture;

    public static void Write(StudyResult r, string folder, string markdown)
    {
        File.WriteAllText(Path.Combine(folder, StudyFolder.MarkdownFile), markdown);
        WriteCsv(r, Path.Combine(folder, StudyFolder.CsvFile));
        foreach ((string prompt, _) in r.Spec.Prompts)
        {
            AccuracyPlot(r, prompt).SavePng(Path.Combine(folder, StudyFolder.AccuracyPlot(prompt)), 1000, 520);
            if (r.Curves.Any(c => c.Prompt == prompt))
            {
                LossPlot(r, prompt).SavePng(Path.Combine(folder, StudyFolder.LossPlot(prompt)), 1000, 560);
            }
            if (r.Layers.Any(c => c.Prompt == prompt))
            {
                LayersPlot(r, prompt).SavePng(Path.Combine(folder, StudyFolder.LayersPlot(prompt)), 1000, 520);
            }
        }
        // Last: the page carries the plots just written.
        File.WriteAllText(Path.Combine(folder, StudyFolder.HtmlFile), StudyHtml.Build(r, folder, markdown));
    }

    public static string Markdown(StudyResult r)
    {
        var s = new StringBuilder();
        StudyCell any = r.Cells[0];
        int train = r.Cells.Where(c => c.TrainRows > 0).Select(c => c.TrainRows).DefaultIfEmpty(0).Max();
        s.Append(Inv, $"Study {Path.GetFileName(r.Spec.Path)}: {r.Classes.Count} classes (chance {1.0 / r.Classes.Count:P1}); ")
            .Append(Inv, $"probes fitted on {train:N0} training texts (every {r.Spec.TrainEvery}. of {Path.GetFileName(r.Spec.Train)}), ")
            .Append(Inv, $"scored on {any.Score.Rows:N0} test texts (every {r.Spec.TestEvery}. of {Path.GetFileName(r.Spec.Test)}); ")
            .Append(Inv, $"C from {{{string.Join(", ", r.Spec.Probe.InverseRegularizations.Select(c => c.ToString("G3", Inv)))}}} by {r.Spec.Probe.Folds}-fold cross-validation. ")
            .Append("Cross-entropy: the model's own, on the test texts without a prompt. ")
            .Append(Inv, $"Without features (the training labels' frequencies for every text): accuracy {r.Prior.Accuracy * 100:F1} % (the majority class), log loss {r.Prior.LogLoss:F3}.\n\n");

        s.Append("Test accuracy (95 % bootstrap interval):\n\n");
        Table(s, r, c => string.Create(Inv, $"{c.Score.Accuracy * 100:F1} ({c.Score.AccuracyLow * 100:F1}–{c.Score.AccuracyHigh * 100:F1})"));
        s.Append("\nTest log loss (nats):\n\n");
        Table(s, r, c => c.Score.LogLoss.ToString("F3", Inv));
        if (r.Curves.Count > 0)
        {
            s.Append("\nTest log loss against cross-entropy x, fitted as a + b·√(x − x₀) over the models")
                .Append(Inv, $" ({r.Models.Count} points, 3 parameters):\n\n")
                .Append("| prompt | feature | a | b | x₀ | R² |\n|---|---|---:|---:|---:|---:|\n");
            foreach (StudyCurve c in r.Curves)
            {
                s.Append(Inv, $"| {c.Prompt} | {c.Feature} | {c.Fit.A:F3} | {c.Fit.B:F3} | {c.Fit.Shift:F3}{(c.Fit.ShiftAtBound ? "*" : "")} | {c.Fit.RSquared:F3} |\n");
            }
            if (r.Curves.Any(c => c.Fit.ShiftAtBound))
            {
                s.Append("\n\\* x₀ at its bound, the smallest cross-entropy: the points want a curve steeper there than a square root allows.\n");
            }
        }
        Probing(s, r);
        return s.ToString();
    }

    /// <summary>The layer sweep, selectivity and paired comparison tables, for the methods the study asked for.</summary>
    private static void Probing(StringBuilder s, StudyResult r)
    {
        if (r.Layers.Count > 0)
        {
            int deepest = r.Layers.Max(c => int.Parse(c.Feature["layer:".Length..], Inv));
            s.Append("\nTest accuracy by layer (the last token's hidden state; 0 = embeddings; **bold**: each row's best, chosen on the test rows):\n\n")
                .Append("| model | prompt | ").Append(string.Join(" | ", Enumerable.Range(0, deepest + 1).Select(k => k.ToString(Inv)))).Append(" |\n")
                .Append("|---|---|").Append(string.Concat(Enumerable.Range(0, deepest + 1).Select(_ => "---:|"))).Append('\n');
            foreach (IGrouping<(string Model, string Prompt), StudyCell> row in r.Layers.GroupBy(c => (c.Model, c.Prompt)))
            {
                double best = row.Max(c => c.Score.Accuracy);
                s.Append(Inv, $"| {row.Key.Model} | {row.Key.Prompt} | ");
                s.Append(string.Join(" | ", Enumerable.Range(0, deepest + 1).Select(k =>
                    row.FirstOrDefault(c => c.Feature == string.Create(Inv, $"layer:{k}")) is { } c
                        ? (c.Score.Accuracy == best ? string.Create(Inv, $"**{c.Score.Accuracy * 100:F1}**") : string.Create(Inv, $"{c.Score.Accuracy * 100:F1}"))
                        : ""))).Append(" |\n");
            }
        }
        if (r.Selectivity.Count > 0)
        {
            s.Append(Inv, $"\nControl task (type = {r.Spec.Control}; labels drawn per type from the training labels' shares), on the last layer's hidden state. ")
                .Append("Selectivity = task − control accuracy; the floor is always the most frequent control label, the ceiling a lookup table of the training types:\n\n")
                .Append("| model | prompt | probe | task | control | floor | ceiling | selectivity |\n|---|---|---|---:|---:|---:|---:|---:|\n");
            foreach (StudySelectivity x in r.Selectivity)
            {
                SelectivityResult v = x.Result;
                s.Append(Inv, $"| {x.Model} | {x.Prompt} | {v.Kind} | {v.Task.Accuracy * 100:F1} | {v.Control.Report.Accuracy * 100:F1} | {v.Control.MajorityAccuracy * 100:F1} | {v.Control.LookupAccuracy * 100:F1} | {v.Selectivity * 100:+0.0;-0.0} |\n");
            }
        }
        if (r.Comparisons.Count > 0)
        {
            s.Append("\nPaired comparisons on the same test rows (1,000 paired bootstrap resamples; A − B in accuracy points, 95 % interval, share of resamples A wins):\n\n")
                .Append("| model | prompt | A | B | A − B | 95 % | A better | log loss A − B |\n|---|---|---|---|---:|---:|---:|---:|\n");
            foreach (StudyComparison x in r.Comparisons)
            {
                PairedComparison v = x.Result;
                s.Append(Inv, $"| {x.Model} | {x.Prompt} | {x.A} | {x.B} | {v.AccuracyDifference * 100:+0.0;-0.0} | {v.AccuracyLow * 100:+0.0;-0.0} … {v.AccuracyHigh * 100:+0.0;-0.0} | {v.AccuracyABetter * 100:F1} % | {v.LogLossDifference:+0.000;-0.000} |\n");
            }
        }
    }

    private static void Table(StringBuilder s, StudyResult r, Func<StudyCell, string> value)
    {
        s.Append("| model | cross-entropy | prompt | ").Append(string.Join(" | ", r.Spec.Features)).Append(" |\n");
        s.Append("|---|---:|---|").Append(string.Concat(r.Spec.Features.Select(_ => "---:|"))).Append('\n');
        foreach (StudyModel m in r.Models)
        {
            foreach ((string prompt, _) in r.Spec.Prompts)
            {
                s.Append(Inv, $"| {m.Name} | {m.CrossEntropy.NatsPerToken:F3} | {prompt} | ");
                s.Append(string.Join(" | ", r.Spec.Features.Select(f => value(Cell(r, m.Name, prompt, f))))).Append(" |\n");
            }
        }
    }

    private static StudyCell Cell(StudyResult r, string model, string prompt, string feature) =>
        r.Cells.Single(c => c.Model == model && c.Prompt == prompt && c.Feature == feature);

    private static void WriteCsv(StudyResult r, string path)
    {
        using var file = File.Create(path);
        using CsvWriter w = CsvWriter.Create(file, new CsvWriterOptions { NewLine = "\n" });
        foreach (string h in new[] { "model", "cross_entropy_nats_per_token", "cross_entropy_bits_per_byte", "prompt", "template", "feature", "width", "train_rows", "c", "test_rows", "accuracy", "accuracy_low", "accuracy_high", "log_loss", "macro_f1" })
        {
            w.WriteField(h);
        }
        w.EndRecord();
        foreach (StudyCell c in r.Cells)
        {
            StudyModel m = r.Models.Single(x => x.Name == c.Model);
            w.WriteField(c.Model);
            w.WriteField(m.CrossEntropy.NatsPerToken.ToString("R", Inv));
            w.WriteField(m.CrossEntropy.BitsPerByte.ToString("R", Inv));
            w.WriteField(c.Prompt);
            w.WriteField(r.Spec.Prompts.Single(p => p.Name == c.Prompt).Template);
            w.WriteField(c.Feature);
            w.WriteField(c.Width.ToString(Inv));
            w.WriteField(c.TrainRows.ToString(Inv));
            w.WriteField(c.InverseRegularization?.ToString("R", Inv) ?? "");
            w.WriteField(c.Score.Rows.ToString(Inv));
            w.WriteField(c.Score.Accuracy.ToString("R", Inv));
            w.WriteField(c.Score.AccuracyLow.ToString("R", Inv));
            w.WriteField(c.Score.AccuracyHigh.ToString("R", Inv));
            w.WriteField(c.Score.LogLoss.ToString("R", Inv));
            w.WriteField(c.Score.MacroF1.ToString("R", Inv));
            w.EndRecord();
        }
    }

    /// <summary>Bars of test accuracy grouped by feature kind, one colour per model, with the bootstrap interval, chance and the majority class.</summary>
    private static Plot AccuracyPlot(StudyResult r, string prompt)
    {
        var plot = new Plot();
        plot.Font.Set(PlotStyle.FontName);
        int models = r.Models.Count;
        var ticks = new List<Tick>();
        for (int f = 0; f < r.Spec.Features.Count; f++)
        {
            double groupStart = f * (models + 1);
            ticks.Add(new Tick(groupStart + ((models - 1) / 2.0), r.Spec.Features[f]));
            for (int m = 0; m < models; m++)
            {
                StudyCell c = Cell(r, r.Models[m].Name, prompt, r.Spec.Features[f]);
                var bar = new Bar
                {
                    Position = groupStart + m,
                    Value = c.Score.Accuracy * 100,
                    FillColor = PlotStyle.Colour(m),
                    LineColor = Colors.Black,
                    LineWidth = 0.5f,
                };
                plot.Add.Bar(bar);
                var interval = new ScottPlot.Plottables.ErrorBar([bar.Position], [bar.Value], [0.0], [0.0],
                    [(c.Score.AccuracyHigh - c.Score.Accuracy) * 100], [(c.Score.Accuracy - c.Score.AccuracyLow) * 100])
                {
                    Color = Colors.Black,
                };
                plot.Add.Plottable(interval);
            }
        }
        for (int m = 0; m < models; m++)
        {
            plot.Legend.ManualItems.Add(new LegendItem
            {
                LabelText = string.Create(Inv, $"{r.Models[m].Name} (cross-entropy {r.Models[m].CrossEntropy.NatsPerToken:F2})"),
                FillColor = PlotStyle.Colour(m),
            });
        }
        var chance = plot.Add.HorizontalLine(100.0 / r.Classes.Count);
        chance.LinePattern = LinePattern.Dashed;
        chance.Color = Colors.Gray;
        chance.LegendText = string.Create(Inv, $"chance ({100.0 / r.Classes.Count:F1} %)");
        var majority = plot.Add.HorizontalLine(r.Prior.Accuracy * 100);
        majority.LinePattern = LinePattern.Dotted;
        majority.Color = Colors.Gray;
        majority.LegendText = string.Create(Inv, $"majority class ({r.Prior.Accuracy * 100:F1} %)");
        plot.Axes.Bottom.TickGenerator = new ScottPlot.TickGenerators.NumericManual([.. ticks]);
        plot.Axes.Margins(bottom: 0);
        plot.Title($"Test accuracy by feature kind — prompt \"{r.Spec.Prompts.Single(p => p.Name == prompt).Template}\"");
        plot.YLabel("test accuracy (%)");
        plot.Axes.SetLimitsY(0, 1.3 * r.Cells.Where(c => c.Prompt == prompt).Max(c => c.Score.AccuracyHigh) * 100);
        plot.ShowLegend(Alignment.UpperRight);
        return plot;
    }

    /// <summary>Test accuracy against layer, one line per model, with the bootstrap intervals and the majority class.</summary>
    private static Plot LayersPlot(StudyResult r, string prompt)
    {
        var plot = new Plot();
        plot.Font.Set(PlotStyle.FontName);
        int series = 0;
        foreach (StudyModel m in r.Models)
        {
            StudyCell[] cells = [.. r.Layers.Where(c => c.Model == m.Name && c.Prompt == prompt)];
            double[] layers = [.. cells.Select(c => (double)int.Parse(c.Feature["layer:".Length..], Inv))];
            double[] accuracy = [.. cells.Select(c => 100 * c.Score.Accuracy)];
            var line = plot.Add.Scatter(layers, accuracy);
            line.Color = PlotStyle.Colour(series);
            line.MarkerShape = PlotStyle.Marker(series);
            line.MarkerSize = 8;
            line.LegendText = string.Create(Inv, $"{m.Name} (cross-entropy {m.CrossEntropy.NatsPerToken:F2})");
            plot.Add.Plottable(new ScottPlot.Plottables.ErrorBar(layers, accuracy, [.. layers.Select(_ => 0.0)], [.. layers.Select(_ => 0.0)],
                [.. cells.Select(c => 100 * (c.Score.AccuracyHigh - c.Score.Accuracy))], [.. cells.Select(c => 100 * (c.Score.Accuracy - c.Score.AccuracyLow))])
            {
                Color = PlotStyle.Colour(series),
            });
            series++;
        }
        var majority = plot.Add.HorizontalLine(r.Prior.Accuracy * 100);
        majority.LinePattern = LinePattern.Dotted;
        majority.Color = Colors.Gray;
        majority.LegendText = string.Create(Inv, $"majority class ({r.Prior.Accuracy * 100:F1} %)");
        double[] ticks = [.. r.Layers.Select(c => (double)int.Parse(c.Feature["layer:".Length..], Inv)).Distinct().Order()];
        plot.Axes.Bottom.TickGenerator = new ScottPlot.TickGenerators.NumericManual(ticks, [.. ticks.Select(t => t.ToString(Inv))]);
        plot.Title($"Test accuracy by layer — prompt \"{r.Spec.Prompts.Single(p => p.Name == prompt).Template}\"");
        plot.XLabel("layer (0 = embeddings, last = after the final norm)");
        plot.YLabel("test accuracy (%)");
        plot.Axes.SetLimitsY(0, Math.Min(100, 1.2 * 100 * r.Layers.Where(c => c.Prompt == prompt).Max(c => c.Score.AccuracyHigh)));
        plot.ShowLegend(Alignment.LowerRight);
        return plot;
    }

    /// <summary>Test log loss against the models' cross-entropy, one series per feature kind, with the fitted curves.</summary>
    private static Plot LossPlot(StudyResult r, string prompt)
    {
        var plot = new Plot();
        plot.Font.Set(PlotStyle.FontName);
        int i = 0;
        foreach (StudyCurve c in r.Curves.Where(c => c.Prompt == prompt))
        {
            Color color = PlotStyle.Colour(i);
            var points = plot.Add.ScatterPoints(c.Points.Select(p => p.CrossEntropy).ToArray(), c.Points.Select(p => p.LogLoss).ToArray());
            points.Color = color;
            points.MarkerShape = PlotStyle.Marker(i++);
            points.MarkerSize = 9;
            points.LegendText = string.Create(Inv, $"{c.Feature}: {c.Fit.A:F2} + {c.Fit.B:F2}·√(x − {c.Fit.Shift:F2}), R² {c.Fit.RSquared:F3}");
            double low = c.Points.Min(p => p.CrossEntropy), high = c.Points.Max(p => p.CrossEntropy);
            double[] xs = [.. Enumerable.Range(0, 200).Select(k => low + ((high - low) * k / 199.0))];
            var curve = plot.Add.ScatterLine(xs, [.. xs.Select(c.Fit.Predict)]);
            curve.Color = color;
            curve.LineWidth = 1.5f;
        }
        foreach (StudyModel m in r.Models)
        {
            var label = plot.Add.VerticalLine(m.CrossEntropy.NatsPerToken);
            label.Color = Colors.Gray.WithAlpha(0.5);
            label.LinePattern = LinePattern.Dotted;
            label.Text = m.Name;
            label.LabelOppositeAxis = true;
        }
        var prior = plot.Add.HorizontalLine(r.Prior.LogLoss);
        prior.LinePattern = LinePattern.Dashed;
        prior.Color = Colors.Gray;
        prior.LegendText = string.Create(Inv, $"no features: the label prior ({r.Prior.LogLoss:F3})");
        plot.Title($"Test log loss against the model's cross-entropy — prompt \"{r.Spec.Prompts.Single(p => p.Name == prompt).Template}\"");
        plot.XLabel("the model's cross-entropy on the test texts (nats/token)");
        plot.YLabel("probe test log loss (nats)");
        plot.ShowLegend(Alignment.LowerRight);
        plot.Axes.SetLimitsY(0.95 * r.Curves.Where(c => c.Prompt == prompt).Min(c => c.Points.Min(p => p.LogLoss)), 1.05 * Math.Max(r.Prior.LogLoss, r.Curves.Where(c => c.Prompt == prompt).Max(c => c.Points.Max(p => p.LogLoss))));
        return plot;
    }
}
