using System.Globalization;
using System.Text.Json;
using Assay.Evaluation;
using Assay.Fixtures;
using Assay.Tests.Support;

namespace Assay.Tests.Evaluation;

/// <summary>The paired bootstrap against a numpy implementation fed the same resample indices (Debian python3-numpy).</summary>
public sealed class PairedComparisonTests
{
    [Theory]
    [InlineData(3, 150, 400, 0.2)]
    [InlineData(5, 61, 1000, 0.0)]
    public void Differences_intervals_and_win_shares_equal_numpy_on_the_same_resamples(int classes, int n, int samples, double edge)
    {
        // Two noisy classifiers of one truth; A is given a small edge so the interval is not centred on 0.
        var rng = new DeterministicRandom((ulong)(n * 7 + classes));
        int[] truth = [.. Enumerable.Range(0, n).Select(i => i % classes)];
        double[] a = Probabilities(ref rng, truth, classes, edge);
        double[] b = Probabilities(ref rng, truth, classes, 0);
        const ulong seed = 3;
        PairedComparison c = PairedComparison.Compare(a, b, truth, classes, samples, seed);

        // The resamples Compare drew, in its order, for numpy to score.
        double[] indices = new double[samples * n];
        Random draws = PairedComparison.Generator(seed);
        int[] rows = new int[n];
        for (int s = 0; s < samples; s++)
        {
            PairedComparison.Resample(draws, rows);
            for (int i = 0; i < n; i++)
            {
                indices[(s * n) + i] = rows[i];
            }
        }
        using var temp = new TempFolder();
        Npy.WriteFloat64(temp.File("a.npy"), a, classes);
        Npy.WriteFloat64(temp.File("b.npy"), b, classes);
        Npy.WriteFloat64(temp.File("y.npy"), [.. truth.Select(v => (double)v)], 1);
        Npy.WriteFloat64(temp.File("idx.npy"), indices, n);
        using JsonDocument np = JsonDocument.Parse(PythonReference.Run("paired_bootstrap_numpy.py", temp.File("a.npy"), temp.File("b.npy"), temp.File("y.npy"), temp.File("idx.npy")));
        JsonElement r = np.RootElement;

        // Means of the same numbers summed in another order: equal to 1e-12 (stated tolerance).
        Assert.Equal(r.GetProperty("accuracy_difference").GetDouble(), c.AccuracyDifference, 1e-12);
        Assert.Equal(r.GetProperty("log_loss_difference").GetDouble(), c.LogLossDifference, 1e-12);
        Assert.Equal(r.GetProperty("accuracy_95")[0].GetDouble(), c.AccuracyLow, 1e-12);
        Assert.Equal(r.GetProperty("accuracy_95")[1].GetDouble(), c.AccuracyHigh, 1e-12);
        Assert.Equal(r.GetProperty("log_loss_95")[0].GetDouble(), c.LogLossLow, 1e-12);
        Assert.Equal(r.GetProperty("log_loss_95")[1].GetDouble(), c.LogLossHigh, 1e-12);
        Assert.Equal(r.GetProperty("accuracy_a_better").GetDouble(), c.AccuracyABetter, 1e-12);
        Assert.Equal(r.GetProperty("accuracy_b_better").GetDouble(), c.AccuracyBBetter, 1e-12);
        Assert.Equal(r.GetProperty("log_loss_a_better").GetDouble(), c.LogLossABetter, 1e-12);
        Assert.Equal(r.GetProperty("log_loss_b_better").GetDouble(), c.LogLossBBetter, 1e-12);
        Assert.True(c.AccuracyLow <= c.AccuracyDifference && c.AccuracyDifference <= c.AccuracyHigh,
            string.Create(CultureInfo.InvariantCulture, $"difference {c.AccuracyDifference} outside its interval {c.AccuracyLow} … {c.AccuracyHigh}"));
    }

    [Fact]
    public void A_classifier_compared_with_itself_differs_by_nothing()
    {
        var rng = new DeterministicRandom(5);
        int[] truth = [.. Enumerable.Range(0, 40).Select(i => i % 4)];
        double[] p = Probabilities(ref rng, truth, 4, 0);
        PairedComparison c = PairedComparison.Compare(p, p, truth, 4, 200);
        Assert.Equal((0.0, 0.0, 0.0, 0.0, 0.0), (c.AccuracyDifference, c.AccuracyLow, c.AccuracyHigh, c.AccuracyABetter, c.LogLossBBetter));
    }

    [Fact]
    public void Shapes_that_disagree_are_refused()
    {
        Assert.Throws<ArgumentException>(() => PairedComparison.Compare(new double[6], new double[4], [0, 1], 3));
        Assert.Throws<ArgumentException>(() => PairedComparison.Compare([], [], [], 2));
    }

    /// <summary>Softmax of noise plus <paramref name="edge"/> + 1 on the true class: right most of the time, not always.</summary>
    private static double[] Probabilities(ref DeterministicRandom rng, int[] truth, int classes, double edge)
    {
        double[] p = new double[truth.Length * classes];
        for (int i = 0; i < truth.Length; i++)
        {
            double sum = 0;
            for (int j = 0; j < classes; j++)
            {
                double z = (2 * rng.NextUnit()) + (j == truth[i] ? 1 + edge : 0);
                p[(i * classes) + j] = Math.Exp(z);
                sum += p[(i * classes) + j];
            }
            for (int j = 0; j < classes; j++)
            {
                p[(i * classes) + j] /= sum;
            }
        }
        return p;
    }
}
