namespace Assay.Evaluation;

/// <summary>
/// How well predicted class probabilities match labels: accuracy with a bootstrap 95 % interval (percentile method,
/// seeded resampling of rows), mean log loss (natural log, probabilities clipped at 1e-15 as scikit-learn's log_loss
/// does), macro-averaged F1 (over the classes that have rows or predictions, as scikit-learn's f1_score), and the
/// confusion matrix (row = true class, column = predicted).
/// </summary>
public sealed record ProbeReport(int Rows, double Accuracy, double AccuracyLow, double AccuracyHigh, double LogLoss, double MacroF1, int[,] Confusion)
{
    /// <summary>Scores probabilities (n × classes) against true class indices.</summary>
    public static ProbeReport Score(double[] probabilities, int[] truth, int classes, int bootstrapSamples = 1000, ulong seed = 1)
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
        return new ProbeReport(n, accuracy, low, high, loss / n, present == 0 ? 0 : f1 / present, confusion);
    }
}
