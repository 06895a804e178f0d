using System.Text.Json;
using Assay.Evaluation;
using Assay.Fixtures;
using Assay.Tests.Support;

namespace Assay.Tests.Evaluation;

/// <summary>The probe's logistic regression against scikit-learn's on the same data and regularization.</summary>
public sealed class LogisticRegressionTests
{
    [Theory]
    [InlineData(3, 5, 200, 1.0)]
    [InlineData(4, 12, 300, 0.05)]
    [InlineData(2, 3, 80, 20.0)]
    public void Coefficients_match_scikit_learn(int classes, int d, int n, double c)
    {
        // Overlapping Gaussian classes: class j has mean 0.8·e_(j mod d) and unit variance.
        var rng = new DeterministicRandom((ulong)(classes * 1000 + d));
        double[] x = new double[n * d];
        int[] y = new int[n];
        float[] noise = new float[d];
        for (int i = 0; i < n; i++)
        {
            y[i] = i % classes;
            rng.FillNormal(noise, 1.0);
            for (int f = 0; f < d; f++)
            {
                x[(i * d) + f] = noise[f] + (f == y[i] % d ? 0.8 : 0);
            }
        }

        LogisticRegression model = LogisticRegression.Fit(x, n, d, y, classes, c);

        using var temp = new TempFolder();
        Npy.WriteFloat64(temp.File("x.npy"), x, d);
        Npy.WriteFloat64(temp.File("y.npy"), [.. y.Select(v => (double)v)], 1);
        using JsonDocument sk = JsonDocument.Parse(PythonReference.Run("logistic_sklearn.py", temp.File("x.npy"), temp.File("y.npy"), c.ToString("R", System.Globalization.CultureInfo.InvariantCulture)));
        double[][] coef = [.. sk.RootElement.GetProperty("coef").EnumerateArray().Select(r => r.EnumerateArray().Select(v => v.GetDouble()).ToArray())];
        double[] intercept = [.. sk.RootElement.GetProperty("intercept").EnumerateArray().Select(v => v.GetDouble())];
        // Both solvers stop near the same strictly convex minimum: coefficients agree to 1e-4 (stated tolerance).
        for (int j = 0; j < classes; j++)
        {
            for (int f = 0; f < d; f++)
            {
                Assert.True(Math.Abs(model.Weights[(j * d) + f] - coef[j][f]) < 1e-4,
                    $"W[{j},{f}] = {model.Weights[(j * d) + f]}, scikit-learn {coef[j][f]}");
            }
            Assert.True(Math.Abs(model.Intercepts[j] - intercept[j]) < 1e-4, $"b[{j}] = {model.Intercepts[j]}, scikit-learn {intercept[j]}");
        }
        double objective = Objective(model, x, n, d, y, c);
        Assert.True(objective <= sk.RootElement.GetProperty("objective").GetDouble() * (1 + 1e-9), $"objective {objective} above scikit-learn's");
    }

    private static double Objective(LogisticRegression m, double[] x, int n, int d, int[] y, double c)
    {
        double loss = 0;
        double[] p = new double[m.Classes];
        for (int i = 0; i < n; i++)
        {
            m.Probabilities(x.AsSpan(i * d, d), p);
            loss -= Math.Log(p[y[i]]);
        }
        return (c * loss) + (0.5 * m.Weights.Sum(w => w * w));
    }
}
