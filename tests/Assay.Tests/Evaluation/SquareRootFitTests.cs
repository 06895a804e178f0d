using System.Globalization;
using System.Text.Json;
using Assay.Evaluation;
using Assay.Tests.Support;

namespace Assay.Tests.Evaluation;

/// <summary>The study's a + b·√(x − x₀) fit against scipy's bounded nonlinear least squares (Debian python3-scipy).</summary>
public sealed class SquareRootFitTests
{
    public static TheoryData<double[], double[]> Points => new()
    {
        // Noisy points of a curve with a small gap below the smallest x (the fit is ill-conditioned there).
        { [4.2, 4.8, 5.5, 6.2, 7.8, 10.9], [1.13, 1.47, 1.71, 1.89, 2.31, 2.5] },
        // Four points, as a study of three checkpoints and the initialization gives: one degree of freedom left.
        { [4.27, 4.84, 6.17, 10.86], [1.71, 2.02, 2.55, 3.10] },
        // Falling y (b < 0), wide spread.
        { [3.0, 3.5, 5.0, 8.0, 9.0], [0.95, 0.80, 0.62, 0.35, 0.33] },
    };

    [Theory]
    [MemberData(nameof(Points))]
    public void Residual_is_no_larger_than_scipy_and_r2_agrees(double[] x, double[] y)
    {
        SquareRootFit fit = SquareRootFit.Fit(x, y);
        using JsonDocument sp = JsonDocument.Parse(PythonReference.Run("sqrt_fit_scipy.py", Json(x), Json(y)));
        double scipySse = sp.RootElement.GetProperty("sse").GetDouble(), scipyR2 = sp.RootElement.GetProperty("r2").GetDouble();
        double sse = x.Select((v, i) => Math.Pow(y[i] - fit.Predict(v), 2)).Sum();
        // Both search the same one-dimensional profile; ours may only find a lower minimum (tolerance 1e-9 relative,
        // stated), so R² is at least scipy's less 1e-9.
        Assert.True(sse <= (scipySse * (1 + 1e-9)) + 1e-15, $"residual {sse:R}, scipy {scipySse:R}");
        Assert.True(fit.RSquared >= scipyR2 - 1e-9, $"R² {fit.RSquared:R}, scipy {scipyR2:R}");
        Assert.True(fit.Shift < x.Min());
        Assert.Equal(x.Length, fit.Points);
    }

    [Fact]
    public void Exact_points_give_back_the_curve()
    {
        // y = 0.9 + 0.6·√(x − 3.9) exactly: parameters recovered to 1e-6 and R² = 1 to 1e-12.
        double[] x = [4.0, 4.5, 5.2, 6.8, 9.1, 10.8];
        double[] y = [.. x.Select(v => 0.9 + (0.6 * Math.Sqrt(v - 3.9)))];
        SquareRootFit fit = SquareRootFit.Fit(x, y);
        Assert.Equal(0.9, fit.A, 1e-6);
        Assert.Equal(0.6, fit.B, 1e-6);
        Assert.Equal(3.9, fit.Shift, 1e-6);
        Assert.Equal(1.0, fit.RSquared, 1e-12);
        Assert.False(fit.ShiftAtBound);
    }

    [Fact]
    public void A_curve_steeper_than_a_square_root_puts_the_shift_at_its_bound()
    {
        // y = −ln(x − 3.9) + 3 falls faster than any square root can near x = 4: the gap goes to the grid's end.
        double[] x = [4.0, 4.5, 5.2, 6.8, 9.1];
        SquareRootFit fit = SquareRootFit.Fit(x, [.. x.Select(v => (0.2 * Math.Log(v - 3.9)) + 3)]);
        Assert.True(fit.ShiftAtBound, $"shift {fit.Shift}");
        Assert.True(x.Min() - fit.Shift <= 1e-6 * (x.Max() - x.Min()) * 1.0001);
    }

    [Fact]
    public void Too_few_points_or_one_x_are_refused()
    {
        Assert.Contains("at least 3 points", Assert.Throws<ArgumentException>(() => SquareRootFit.Fit([1, 2], [1, 2])).Message, StringComparison.Ordinal);
        Assert.Contains("two different x", Assert.Throws<ArgumentException>(() => SquareRootFit.Fit([2, 2, 2], [1, 2, 3])).Message, StringComparison.Ordinal);
        Assert.Contains("finite", Assert.Throws<ArgumentException>(() => SquareRootFit.Fit([1, 2, double.NaN], [1, 2, 3])).Message, StringComparison.Ordinal);
    }

    private static string Json(double[] v) => "[" + string.Join(',', v.Select(d => d.ToString("R", CultureInfo.InvariantCulture))) + "]";
}
