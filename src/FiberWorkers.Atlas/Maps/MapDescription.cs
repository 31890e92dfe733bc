namespace FiberWorkers.Atlas.Maps;

/// <summary>What a rendered map shows, for the command's report and for checks on the image.</summary>
public sealed record MapDescription
{
    /// <summary>The atlas drawn.</summary>
    public required string AtlasId { get; init; }

    /// <summary>The atlas version drawn.</summary>
    public required int Version { get; init; }

    /// <summary>The horizontal axis and its range (the parameter's box).</summary>
    public required MapAxis X { get; init; }

    /// <summary>The vertical axis and its range (the parameter's box).</summary>
    public required MapAxis Y { get; init; }

    /// <summary>The other parameters: where they are fixed and the half-width of the slab shown around them.</summary>
    public required IReadOnlyList<MapFixedParameter> Fixed { get; init; }

    /// <summary>Image width in pixels.</summary>
    public required int Width { get; init; }

    /// <summary>Image height in pixels.</summary>
    public required int Height { get; init; }

    /// <summary>The plotted data area in image pixels (left, top, right, bottom; y grows downwards).</summary>
    public required (float Left, float Top, float Right, float Bottom) DataArea { get; init; }

    /// <summary>Samples drawn (those in the slab).</summary>
    public required int SamplesShown { get; init; }

    /// <summary>Crossings drawn, by kind (fold, fold-at-infinity, passage).</summary>
    public required IReadOnlyDictionary<string, int> CrossingsShown { get; init; }

    /// <summary>The legend: one entry per real count present, in increasing order.</summary>
    public required IReadOnlyList<MapLegendEntry> Legend { get; init; }

    /// <summary>How the background was labeled: <c>nearest sample</c> or the labeler's name.</summary>
    public required string Regions { get; init; }

    /// <summary>Background grid cells per axis.</summary>
    public required (int Columns, int Rows) Grid { get; init; }

    /// <summary>The image pixel (column, row) of a parameter point of the slice.</summary>
    public (float Column, float Row) PixelOf(double x, double y)
    {
        var (left, top, right, bottom) = DataArea;
        return (
            left + (float)((x - X.Low) / (X.High - X.Low) * (right - left)),
            bottom - (float)((y - Y.Low) / (Y.High - Y.Low) * (bottom - top)));
    }
}

/// <summary>An axis of a map: the parameter and its range.</summary>
public sealed record MapAxis(string Name, double Low, double High);

/// <summary>A parameter held fixed: its value and the half-width of the slab of samples shown.</summary>
public sealed record MapFixedParameter(string Name, double Value, double HalfWidth);

/// <summary>
/// One real count on a map: its region color (background), its sample color, the samples drawn with it and the
/// fraction of the background grid it covers.
/// </summary>
public sealed record MapLegendEntry(int Label, string RegionColor, string SampleColor, int Samples, double AreaFraction);

/// <summary>A rendered map: the PNG bytes and what they show.</summary>
public sealed record MapImage(byte[] Png, MapDescription Description);
