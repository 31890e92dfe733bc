using ScottPlot;

namespace FiberWorkers.Atlas.Maps;

/// <summary>
/// The map's colors: one base hue per real count (the same count has the same color on every map), a light tint
/// of it for the region background and a deeper shade for the sample points, so a sample whose label disagrees
/// with the region around it stands out.
/// </summary>
internal static class MapPalette
{
    private static readonly string[] Hues =
    [
        "#8A94A6", // 0 real: slate grey (nothing real: muted)
        "#3F7FBF", // 1: cobalt
        "#E0A030", // 2: saffron
        "#C44B3C", // 3: brick
        "#4F9A5C", // 4: fern
        "#2E9C9C", // 5: lagoon
        "#8C5FA8", // 6: plum
        "#7F8A2E", // 7: moss
        "#C25A7C", // 8: raspberry
    ];

    /// <summary>The figure's background: warm paper white.</summary>
    public static Color Figure { get; } = Color.FromHex("#FBFAF6");

    /// <summary>Axis lines, ticks and text.</summary>
    public static Color Ink { get; } = Color.FromHex("#2B2D33");

    /// <summary>Grid lines, drawn over the regions and faint.</summary>
    public static Color GridLine { get; } = Color.FromHex("#2B2D33").WithAlpha(28);

    /// <summary>Fold and fold-at-infinity markers.</summary>
    public static Color Crossing { get; } = Color.FromHex("#17181C");

    /// <summary>Passage markers (not region boundaries).</summary>
    public static Color Passage { get; } = Color.FromHex("#5E6270");

    /// <summary>
    /// The base hue of a real count; counts past the table reuse it, darkened once per round. Neighbours of the same
    /// parity (the counts one family shows) differ most: 1, 3, 5, 7 and 0, 2, 4, 6, 8 are far apart in hue.
    /// </summary>
    public static Color Hue(int label)
    {
        var index = Math.Abs(label) % Hues.Length;
        var round = Math.Abs(label) / Hues.Length;
        var color = Color.FromHex(Hues[index]);
        return round == 0 ? color : Mix(color, Color.FromHex("#000000"), Math.Min(0.6, 0.25 * round));
    }

    /// <summary>The region tint: 40% hue on white.</summary>
    public static Color Region(int label) => Mix(Hue(label), Color.FromHex("#FFFFFF"), 0.6);

    /// <summary>The sample shade: the hue with 20% black.</summary>
    public static Color Sample(int label) => Mix(Hue(label), Color.FromHex("#000000"), 0.2);

    /// <summary>#RRGGBB.</summary>
    public static string Hex(Color color) => $"#{color.R:X2}{color.G:X2}{color.B:X2}";

    private static Color Mix(Color color, Color other, double weight) => new(
        (byte)Math.Round((color.R * (1 - weight)) + (other.R * weight)),
        (byte)Math.Round((color.G * (1 - weight)) + (other.G * weight)),
        (byte)Math.Round((color.B * (1 - weight)) + (other.B * weight)));
}
