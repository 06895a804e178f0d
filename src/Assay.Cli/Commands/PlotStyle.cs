using ScottPlot;

namespace Assay.Cli.Commands;

/// <summary>
/// The study plots' own look: a palette of eight colours and a set of eight markers. Neighbouring colours differ in
/// lightness as well as hue (the lightness steps run dark, light, mid, dark, …), so a reader who cannot tell red from
/// green, or who prints the plot in grey, still tells the series apart; no red–green pair is adjacent. Each series also
/// has its own marker, so the scatter plots never rely on colour alone. A series past the eighth reuses the cycle.
/// </summary>
internal static class PlotStyle
{
    /// <summary>A font every Debian 12 machine with fonts-dejavu-core has, so the plots look the same everywhere.</summary>
    public const string FontName = "DejaVu Sans";

    private static readonly Color[] Colours =
    [
        Color.FromHex("#1D3F6E"),   // ink blue (dark)
        Color.FromHex("#E8A33D"),   // ochre (light)
        Color.FromHex("#4D9DB8"),   // lake (mid)
        Color.FromHex("#7A2E55"),   // mulberry (dark)
        Color.FromHex("#A9CBE0"),   // mist (light)
        Color.FromHex("#B5562E"),   // rust (mid)
        Color.FromHex("#1A1A1A"),   // soot (dark)
        Color.FromHex("#D9C27A"),   // straw (light)
    ];

    private static readonly MarkerShape[] Markers =
    [
        MarkerShape.FilledCircle,
        MarkerShape.FilledSquare,
        MarkerShape.FilledTriangleUp,
        MarkerShape.FilledDiamond,
        MarkerShape.FilledTriangleDown,
        MarkerShape.OpenCircle,
        MarkerShape.OpenSquare,
        MarkerShape.OpenDiamond,
    ];

    /// <summary>The colour of series <paramref name="index"/> (0-based).</summary>
    public static Color Colour(int index) => Colours[index % Colours.Length];

    /// <summary>The marker of series <paramref name="index"/> (0-based).</summary>
    public static MarkerShape Marker(int index) => Markers[index % Markers.Length];
}
