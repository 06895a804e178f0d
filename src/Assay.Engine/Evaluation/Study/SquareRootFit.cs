namespace Assay.Evaluation;

/// <summary>
/// The least-squares curve y ≈ A + B·√(x − Shift) with Shift below every x: downstream loss against a model's
/// cross-entropy x, where Shift plays the part of the best attainable cross-entropy. For a fixed Shift the curve is
/// linear in A and B (ordinary least squares); Shift is found by scanning the gap min(x) − Shift on a log grid from
/// 10⁻⁶ to 10³ times the spread of x and zooming in on the best grid point with finer grids (each 10 times finer, 12
/// times); A and B come from MathNet's straight-line fit. A very large gap
/// makes the curve nearly a straight line in x, so a straight-line trend is the limit of the family, not a failure.
/// </summary>
/// <param name="A">Intercept: the predicted y as x approaches Shift.</param>
/// <param name="B">Scale of the square-root term.</param>
/// <param name="Shift">x₀, below the smallest x.</param>
/// <param name="RSquared">1 − residual sum of squares / total sum of squares.</param>
/// <param name="Points">Points fitted; with 3 parameters, Points − 3 degrees of freedom remain.</param>
/// <param name="ShiftAtBound">
/// The best Shift is at the search's lower end of the gap (within 10⁻⁶ of the spread below the smallest x): the points
/// ask for a curve steeper at the smallest x than the family allows, so Shift there is a bound, not an estimate.
/// </param>
public sealed record SquareRootFit(double A, double B, double Shift, double RSquared, int Points, bool ShiftAtBound)
{
    private const int GridPoints = 361;
    private const int ZoomPoints = 21;
    private const int ZoomRounds = 12;

    /// <summary>The fitted curve at x (NaN at or below Shift).</summary>
    public double Predict(double x) => x > Shift ? A + (B * Math.Sqrt(x - Shift)) : double.NaN;

    /// <summary>Fits the curve to the points.</summary>
    /// <exception cref="ArgumentException">Fewer than 3 points, lengths differ, a value is not finite, or all x are equal.</exception>
    public static SquareRootFit Fit(IReadOnlyList<double> x, IReadOnlyList<double> y)
    {
        ArgumentNullException.ThrowIfNull(x);
        ArgumentNullException.ThrowIfNull(y);
        if (x.Count != y.Count || x.Count < 3)
        {
            throw new ArgumentException($"a square-root fit needs at least 3 points with one y each; got {x.Count} x and {y.Count} y");
        }
        if (x.Concat(y).Any(v => !double.IsFinite(v)))
        {
            throw new ArgumentException("a square-root fit needs finite values");
        }
        double low = x.Min(), spread = x.Max() - low;
        if (spread <= 0)
        {
            throw new ArgumentException("a square-root fit needs at least two different x");
        }

        // Profile: the residual sum of squares at the best A, B for a given log10(gap / spread).
        double Residual(double logGap) => LinearPart(x, y, low - (spread * Math.Pow(10, logGap))).Residual;
        const double from = -6, to = 3;
        double step = (to - from) / (GridPoints - 1);
        int best = 0;
        double bestResidual = double.PositiveInfinity;
        for (int i = 0; i < GridPoints; i++)
        {
            double r = Residual(from + (i * step));
            if (r < bestResidual)
            {
                (best, bestResidual) = (i, r);
            }
        }
        double logGapBest = from + (best * step);
        for (int round = 0; round < ZoomRounds; round++)
        {
            // Zoom: a finer grid over the best point's neighbourhood, which holds the profile's minimum.
            double centre = logGapBest, width = step;
            step = 2 * width / (ZoomPoints - 1);
            for (int i = 0; i < ZoomPoints; i++)
            {
                double g = Math.Clamp(centre - width + (i * step), from, to);
                double r = Residual(g);
                if (r < bestResidual)
                {
                    (logGapBest, bestResidual) = (g, r);
                }
            }
        }

        double shift = low - (spread * Math.Pow(10, logGapBest));
        (double a, double b, double residual) = LinearPart(x, y, shift);
        double mean = y.Average(), total = y.Sum(v => (v - mean) * (v - mean));
        return new SquareRootFit(a, b, shift, total > 0 ? 1 - (residual / total) : 1, x.Count, logGapBest <= from + 1e-9);
    }

    private static (double A, double B, double Residual) LinearPart(IReadOnlyList<double> x, IReadOnlyList<double> y, double shift)
    {
        double[] s = [.. x.Select(v => Math.Sqrt(v - shift))];
        (double a, double b) = MathNet.Numerics.Fit.Line(s, [.. y]);
        double residual = 0;
        for (int i = 0; i < s.Length; i++)
        {
            double e = y[i] - (a + (b * s[i]));
            residual += e * e;
        }
        return (a, b, residual);
    }
}
