using System.Text.Json.Nodes;

namespace Assay.Evaluation;

/// <summary>
/// Two classifiers scored on the same test rows, compared by a paired bootstrap: each resample draws n rows with
/// replacement and both are scored on those same rows, so the interval of the difference leaves out the variation
/// the two share (which rows are hard). Differences are A − B; for accuracy higher is better, for log loss lower.
/// The interval is the percentile interval of the resampled differences, as <see cref="ClassificationReport"/>'s.
/// </summary>
/// <param name="Rows">Test rows.</param>
/// <param name="Samples">Bootstrap resamples.</param>
/// <param name="AccuracyA">A's accuracy.</param>
/// <param name="AccuracyB">B's accuracy.</param>
/// <param name="AccuracyDifference">A − B.</param>
/// <param name="AccuracyLow">2.5th percentile of the resampled difference.</param>
/// <param name="AccuracyHigh">97.5th percentile of the resampled difference.</param>
/// <param name="AccuracyABetter">Share of resamples in which A's accuracy is higher.</param>
/// <param name="AccuracyBBetter">Share of resamples in which B's accuracy is higher (the rest are ties).</param>
/// <param name="LogLossA">A's mean log loss.</param>
/// <param name="LogLossB">B's mean log loss.</param>
/// <param name="LogLossDifference">A − B.</param>
/// <param name="LogLossLow">2.5th percentile of the resampled difference.</param>
/// <param name="LogLossHigh">97.5th percentile of the resampled difference.</param>
/// <param name="LogLossABetter">Share of resamples in which A's log loss is lower.</param>
/// <param name="LogLossBBetter">Share of resamples in which B's log loss is lower.</param>
public sealed record PairedComparison(int Rows, int Samples,
    double AccuracyA, double AccuracyB, double AccuracyDifference, double AccuracyLow, double AccuracyHigh, double AccuracyABetter, double AccuracyBBetter,
    double LogLossA, double LogLossB, double LogLossDifference, double LogLossLow, double LogLossHigh, double LogLossABetter, double LogLossBBetter)
{
    /// <summary>Compares two sets of class probabilities (n × classes each, the same class order) on the same true classes.</summary>
    /// <exception cref="ArgumentException">Shapes disagree, no rows, or no resamples.</exception>
    public static PairedComparison Compare(double[] probabilitiesA, double[] probabilitiesB, int[] truth, int classes, int samples = 1000, ulong seed = 1)
    {
        ArgumentNullException.ThrowIfNull(probabilitiesA);
        ArgumentNullException.ThrowIfNull(probabilitiesB);
        ArgumentNullException.ThrowIfNull(truth);
        int n = truth.Length;
        if (n == 0 || samples < 1 || probabilitiesA.Length != (long)n * classes || probabilitiesB.Length != (long)n * classes)
        {
            throw new ArgumentException($"expected {n} × {classes} probabilities from each side, at least one row and one resample; got {probabilitiesA.Length} and {probabilitiesB.Length} values, {samples} resamples");
        }
        (bool[] hitA, double[] lossA) = PerRow(probabilitiesA, truth, classes);
        (bool[] hitB, double[] lossB) = PerRow(probabilitiesB, truth, classes);

        double[] accuracy = new double[samples], loss = new double[samples];
        int[] rows = new int[n];
        var rng = Generator(seed);
        int accA = 0, accB = 0, lossAWins = 0, lossBWins = 0;
        for (int b = 0; b < samples; b++)
        {
            Resample(rng, rows);
            int hits = 0;
            double sum = 0;
            foreach (int i in rows)
            {
                hits += (hitA[i] ? 1 : 0) - (hitB[i] ? 1 : 0);
                sum += lossA[i] - lossB[i];
            }
            accuracy[b] = hits / (double)n;
            loss[b] = sum / n;
            accA += hits > 0 ? 1 : 0;
            accB += hits < 0 ? 1 : 0;
            lossAWins += sum < 0 ? 1 : 0;
            lossBWins += sum > 0 ? 1 : 0;
        }
        double meanA = hitA.Count(h => h) / (double)n, meanB = hitB.Count(h => h) / (double)n;
        double logA = lossA.Sum() / n, logB = lossB.Sum() / n;
        (double aLow, double aHigh) = Percentiles(accuracy);
        (double lLow, double lHigh) = Percentiles(loss);
        return new PairedComparison(n, samples, meanA, meanB, meanA - meanB, aLow, aHigh, accA / (double)samples, accB / (double)samples,
            logA, logB, logA - logB, lLow, lHigh, lossAWins / (double)samples, lossBWins / (double)samples);
    }

    /// <summary>The resample generator of a seed; <see cref="Resample"/> draws one resample's rows from it.</summary>
    internal static Random Generator(ulong seed) => new(unchecked((int)seed) ^ 0x9a1ed);

    /// <summary>Fills <paramref name="rows"/> with row indices drawn uniformly with replacement from 0 … rows.Length − 1.</summary>
    internal static void Resample(Random rng, Span<int> rows)
    {
        for (int i = 0; i < rows.Length; i++)
        {
            rows[i] = rng.Next(rows.Length);
        }
    }

    /// <summary>The comparison as JSON, A and B named.</summary>
    public JsonObject ToJson(string a, string b) => new()
    {
        ["a"] = a,
        ["b"] = b,
        ["rows"] = Rows,
        ["resamples"] = Samples,
        ["accuracy"] = new JsonObject
        {
            ["a"] = AccuracyA,
            ["b"] = AccuracyB,
            ["difference"] = AccuracyDifference,
            ["difference_95"] = new JsonArray(AccuracyLow, AccuracyHigh),
            ["a_better"] = AccuracyABetter,
            ["b_better"] = AccuracyBBetter,
        },
        ["log_loss"] = new JsonObject
        {
            ["a"] = LogLossA,
            ["b"] = LogLossB,
            ["difference"] = LogLossDifference,
            ["difference_95"] = new JsonArray(LogLossLow, LogLossHigh),
            ["a_better"] = LogLossABetter,
            ["b_better"] = LogLossBBetter,
        },
    };

    /// <summary>Whether each row's most likely class is the true one, and its log loss (clipped as the report's).</summary>
    private static (bool[] Hit, double[] Loss) PerRow(double[] p, int[] truth, int classes)
    {
        bool[] hit = new bool[truth.Length];
        double[] loss = new double[truth.Length];
        for (int i = 0; i < truth.Length; i++)
        {
            ReadOnlySpan<double> row = p.AsSpan(i * classes, classes);
            hit[i] = LinearProbe.MostLikely(row) == truth[i];
            loss[i] = -Math.Log(Math.Clamp(row[truth[i]], 1e-15, 1 - 1e-15));
        }
        return (hit, loss);
    }

    private static (double Low, double High) Percentiles(double[] values)
    {
        Array.Sort(values);
        int b = values.Length;
        return (values[(int)Math.Floor(0.025 * (b - 1))], values[(int)Math.Ceiling(0.975 * (b - 1))]);
    }
}
