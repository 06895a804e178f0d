using System.Text.Json.Nodes;

namespace Assay.Evaluation;

/// <summary>
/// How well predicted class probabilities match labels: accuracy with a bootstrap 95 % interval (percentile method,
/// seeded resampling of rows), mean log loss (natural log, probabilities clipped at 1e-15 as scikit-learn's log_loss
/// does), macro-averaged F1 (over the classes that have rows or predictions, as scikit-learn's f1_score), and the
/// confusion matrix (row = true class, column = predicted). Probes, zero-shot scoring and the study's baseline all
/// report in this one shape (<see cref="ToJson"/>).
/// </summary>
public sealed record ClassificationReport(int Rows, double Accuracy, double AccuracyLow, double AccuracyHigh, double LogLoss, double MacroF1, int[,] Confusion)
{
    /// <summary>Scores probabilities (n × classes) against true class indices.</summary>
    public static ClassificationReport Score(double[] probabilities, int[] truth, int classes, int bootstrapSamples = 1000, ulong seed = 1)
    {
        int n = truth.Length;
        var confusion = new int[classes, classes];
        double loss = 0;
        bool[] correct = new bool[n];
        for (int i = 0; i < n; i++)
        {
            ReadOnlySpan<double> p = probabilities.AsSpan(i * classes, classes);
            int predicted = LinearProbe.MostLikely(p);
            confusion[truth[i], predicted]++;
            correct[i] = predicted == truth[i];
            loss -= Math.Log(Math.Clamp(p[truth[i]], 1e-15, 1 - 1e-15));
        }
        double accuracy = correct.Count(c => c) / (double)n;

        double f1 = 0;
        int present = 0;
        for (int c = 0; c < classes; c++)
        {
            int tp = confusion[c, c], rowSum = 0, colSum = 0;
            for (int j = 0; j < classes; j++)
            {
                rowSum += confusion[c, j];
                colSum += confusion[j, c];
            }
            if (rowSum == 0 && colSum == 0)
            {
                continue;
            }
            present++;
            f1 += tp == 0 ? 0 : 2.0 * tp / (rowSum + colSum);
        }

        var rng = new Random(unchecked((int)seed) ^ 0x0b007);
        double[] resampled = new double[bootstrapSamples];
        for (int b = 0; b < bootstrapSamples; b++)
        {
            int hits = 0;
            for (int i = 0; i < n; i++)
            {
                hits += correct[rng.Next(n)] ? 1 : 0;
            }
            resampled[b] = hits / (double)n;
        }
        Array.Sort(resampled);
        double low = bootstrapSamples > 0 ? resampled[(int)Math.Floor(0.025 * (bootstrapSamples - 1))] : accuracy;
        double high = bootstrapSamples > 0 ? resampled[(int)Math.Ceiling(0.975 * (bootstrapSamples - 1))] : accuracy;
        return new ClassificationReport(n, accuracy, low, high, loss / n, present == 0 ? 0 : f1 / present, confusion);
    }

    /// <summary>The report as JSON: rows, accuracy with its interval, log loss, macro-F1, the class names and the confusion matrix.</summary>
    public JsonObject ToJson(IReadOnlyList<string> classes)
    {
        ArgumentNullException.ThrowIfNull(classes);
        int k = Confusion.GetLength(0);
        return new JsonObject
        {
            ["rows"] = Rows,
            ["accuracy"] = Accuracy,
            ["accuracy_95"] = new JsonArray(AccuracyLow, AccuracyHigh),
            ["log_loss"] = LogLoss,
            ["macro_f1"] = MacroF1,
            ["classes"] = new JsonArray([.. classes.Select(c => JsonValue.Create(c))]),
            ["confusion"] = new JsonArray([.. Enumerable.Range(0, k).Select(i => new JsonArray([.. Enumerable.Range(0, k).Select(j => JsonValue.Create(Confusion[i, j]))]))]),
        };
    }

    /// <summary>A report from the JSON <see cref="ToJson"/> wrote.</summary>
    internal static ClassificationReport FromJson(JsonObject o)
    {
        JsonArray rows = o["confusion"]!.AsArray();
        var confusion = new int[rows.Count, rows.Count];
        for (int i = 0; i < rows.Count; i++)
        {
            for (int j = 0; j < rows.Count; j++)
            {
                confusion[i, j] = rows[i]![j]!.GetValue<int>();
            }
        }
        return new ClassificationReport(o["rows"]!.GetValue<int>(), o["accuracy"]!.GetValue<double>(), o["accuracy_95"]![0]!.GetValue<double>(),
            o["accuracy_95"]![1]!.GetValue<double>(), o["log_loss"]!.GetValue<double>(), o["macro_f1"]!.GetValue<double>(), confusion);
    }
}
