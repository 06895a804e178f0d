using Assay.Cli.Commands;

namespace Assay.Tests.Cli;

/// <summary>The study plots' palette stays readable for colour-blind readers and in grey.</summary>
public sealed class PlotStyleTests
{
    /// <summary>
    /// Colour-vision deficiency simulation matrices at full severity, applied in linear sRGB (Machado, Oliveira and
    /// Fernandes 2009; values from memory).
    /// </summary>
    private static readonly Dictionary<string, double[,]> Vision = new()
    {
        ["normal"] = new double[,] { { 1, 0, 0 }, { 0, 1, 0 }, { 0, 0, 1 } },
        ["protanopia"] = new[,] { { 0.152286, 1.052583, -0.204868 }, { 0.114503, 0.786281, 0.099216 }, { -0.003882, -0.048116, 1.051998 } },
        ["deuteranopia"] = new[,] { { 0.367322, 0.860646, -0.227968 }, { 0.280085, 0.672501, 0.047413 }, { -0.011820, 0.042940, 0.968881 } },
        ["tritanopia"] = new[,] { { 1.255528, -0.076749, -0.178779 }, { -0.078411, 0.930809, 0.147602 }, { 0.004733, 0.691367, 0.303900 } },
    };

    [Fact]
    public void Every_pair_of_series_colours_stays_apart_under_each_colour_vision()
    {
        // CIE 1976 ΔE between every pair of the 8 series colours, after each simulation (sRGB → XYZ D65 → L*a*b*:
        // common practice). 15 is well above the ≈ 2.3 just-noticeable difference (common practice).
        foreach ((string vision, double[,] m) in Vision)
        {
            double[][] lab = [.. Enumerable.Range(0, 8).Select(i => Lab(Simulate(m, PlotStyle.Colour(i))))];
            for (int i = 0; i < 8; i++)
            {
                for (int j = i + 1; j < 8; j++)
                {
                    double d = Math.Sqrt(lab[i].Zip(lab[j], (a, b) => (a - b) * (a - b)).Sum());
                    Assert.True(d >= 15, $"{vision}: colours {i} and {j} are only ΔE {d:F1} apart");
                }
            }
        }
    }

    [Fact]
    public void Neighbouring_series_differ_in_lightness_and_every_series_has_its_own_marker()
    {
        // In grey (L* alone) each series differs from the next by at least 10 L* units.
        for (int i = 0; i < 7; i++)
        {
            double a = Lab(Linear(PlotStyle.Colour(i)))[0], b = Lab(Linear(PlotStyle.Colour(i + 1)))[0];
            Assert.True(Math.Abs(a - b) >= 10, $"series {i} and {i + 1}: L* {a:F0} and {b:F0}");
        }
        Assert.Equal(8, Enumerable.Range(0, 8).Select(PlotStyle.Marker).Distinct().Count());
    }

    private static double[] Linear(ScottPlot.Color c) => [.. new[] { c.Red, c.Green, c.Blue }.Select(v =>
    {
        double s = v / 255.0;
        return s <= 0.04045 ? s / 12.92 : Math.Pow((s + 0.055) / 1.055, 2.4);
    })];

    private static double[] Simulate(double[,] m, ScottPlot.Color c)
    {
        double[] l = Linear(c);
        return [.. Enumerable.Range(0, 3).Select(r => Math.Clamp((m[r, 0] * l[0]) + (m[r, 1] * l[1]) + (m[r, 2] * l[2]), 0, 1))];
    }

    private static double[] Lab(double[] rgb)
    {
        double x = (0.4124 * rgb[0]) + (0.3576 * rgb[1]) + (0.1805 * rgb[2]);
        double y = (0.2126 * rgb[0]) + (0.7152 * rgb[1]) + (0.0722 * rgb[2]);
        double z = (0.0193 * rgb[0]) + (0.1192 * rgb[1]) + (0.9505 * rgb[2]);
        static double F(double t) => t > Math.Pow(6.0 / 29, 3) ? Math.Cbrt(t) : (t / (3 * Math.Pow(6.0 / 29, 2))) + (4.0 / 29);
        double fx = F(x / 0.95047), fy = F(y), fz = F(z / 1.08883);
        return [(116 * fy) - 16, 500 * (fx - fy), 200 * (fy - fz)];
    }
}
