namespace FiberWorkers.Atlas.Maps;

/// <summary>What a map shows: the two axes, where the other parameters are fixed, the image size and the regions.</summary>
public sealed record MapOptions
{
    /// <summary>The parameter on the horizontal axis; default: the first parameter that is not <see cref="YAxis"/>.</summary>
    public string? XAxis { get; init; }

    /// <summary>The parameter on the vertical axis; default: the first parameter that is not the x axis.</summary>
    public string? YAxis { get; init; }

    /// <summary>
    /// Values of the parameters that are not axes (name → value inside the box); default: the box centre. The map
    /// shows the samples and crossings within one level-0 tile width of these values.
    /// </summary>
    public IReadOnlyDictionary<string, double> Fixed { get; init; } = new Dictionary<string, double>();

    /// <summary>Image width in pixels (default 960, from 200 to 8000).</summary>
    public int Width { get; init; } = 960;

    /// <summary>Image height in pixels (default 720, from 200 to 8000).</summary>
    public int Height { get; init; } = 720;

    /// <summary>Labels the background regions; default (null): the label of the nearest sample in the slice.</summary>
    public IRegionLabeler? Regions { get; init; }

    /// <summary>Smallest accepted width or height.</summary>
    public const int MinimumSize = 200;

    /// <summary>Largest accepted width or height.</summary>
    public const int MaximumSize = 8000;
}
