using System.Globalization;
using FiberWorkers.Algebra.Families;
using FiberWorkers.Atlas.Stores;
using FiberWorkers.Atlas.Sweeps;
using FiberWorkers.Contracts.V1;
using ScottPlot;

namespace FiberWorkers.Atlas.Maps;

/// <summary>
/// Draws a 2-D slice of an atlas version as a PNG: the background regions colored by real count (the nearest
/// sample's label on a fine grid, or an <see cref="IRegionLabeler"/>), the samples of the slab as points in their
/// label's color, the crossings as small dark markers, axes named after the parameters and a legend of counts.
/// The same snapshot and options give the same image.
/// </summary>
public static class MapRenderer
{
    /// <summary>Background grid cells per image pixel along each axis (one cell per 3 pixels, at most 480).</summary>
    private const int PixelsPerCell = 3;

    private const int MaximumCells = 480;

    /// <summary>Renders the map.</summary>
    public static MapImage Render(AtlasSnapshot snapshot, MapOptions options)
    {
        ArgumentNullException.ThrowIfNull(snapshot);
        ArgumentNullException.ThrowIfNull(options);
        ArgumentOutOfRangeException.ThrowIfLessThan(options.Width, MapOptions.MinimumSize);
        ArgumentOutOfRangeException.ThrowIfGreaterThan(options.Width, MapOptions.MaximumSize);
        ArgumentOutOfRangeException.ThrowIfLessThan(options.Height, MapOptions.MinimumSize);
        ArgumentOutOfRangeException.ThrowIfGreaterThan(options.Height, MapOptions.MaximumSize);
        var slice = MapSlice.Resolve(snapshot, options);
        var samples = snapshot.Samples.Where(s => slice.Contains(s.Sample.Point)).Select(s => s.Sample).ToArray();
        var crossings = snapshot.Crossings.Where(c => slice.Contains(c.Crossing.Point)).Select(c => c.Crossing).ToArray();
        if (samples.Length == 0 && options.Regions is null)
        {
            var where = slice.FixedParameters.Count == 0
                ? "the atlas version has no samples"
                : $"no samples lie in the slab {string.Join(", ", slice.FixedParameters.Select(f => Describe(f.Parameter)))}; fix other values or sweep with more lines";
            throw new InputException(slice.FixedParameters.Count == 0 ? $"atlas {snapshot.AtlasId}" : "--fix", string.Empty, where);
        }

        var columns = Math.Clamp(options.Width / PixelsPerCell, 16, MaximumCells);
        var rows = Math.Clamp(options.Height / PixelsPerCell, 16, MaximumCells);
        var labels = BackgroundLabels(slice, samples, options.Regions, columns, rows);
        var present = new SortedSet<int>(samples.Select(s => s.Label));
        foreach (var label in labels)
        {
            present.Add(label);
        }

        using var plot = new Plot();
        plot.Font.Set("DejaVu Sans");
        plot.FigureBackground.Color = MapPalette.Figure;
        plot.DataBackground.Color = MapPalette.Figure;
        plot.Axes.Color(MapPalette.Ink);
        plot.Grid.IsBeneathPlottables = false;
        plot.Grid.MajorLineColor = MapPalette.GridLine;
        plot.Grid.MinorLineWidth = 0;

        using var background = new Image(Pixels(labels, columns, rows));
        var regions = plot.Add.ImageRect(background, new CoordinateRect(slice.X.Low, slice.X.High, slice.Y.Low, slice.Y.High));
        regions.AntiAlias = false;

        var markerSize = MarkerSize(options, samples.Length);
        var legend = new List<MapLegendEntry>();
        var area = labels.Length;
        foreach (var label in present)
        {
            var points = samples.Where(s => s.Label == label).ToArray();
            if (points.Length > 0)
            {
                var markers = plot.Add.Markers(
                    points.Select(s => s.Point[slice.XIndex]).ToArray(),
                    points.Select(s => s.Point[slice.YIndex]).ToArray(),
                    MarkerShape.FilledCircle,
                    markerSize,
                    MapPalette.Sample(label));
                markers.LegendText = string.Empty;
            }

            var cells = labels.Count(l => l == label);
            legend.Add(new MapLegendEntry(label, MapPalette.Hex(MapPalette.Region(label)), MapPalette.Hex(MapPalette.Sample(label)), points.Length, (double)cells / area));
            plot.Legend.ManualItems.Add(new LegendItem
            {
                LabelText = $"{label} real  ({Count(points.Length, "sample")})",
                FillColor = MapPalette.Region(label),
                OutlineColor = MapPalette.Sample(label),
                OutlineWidth = 1.5f,
                MarkerShape = MarkerShape.FilledCircle,
                MarkerFillColor = MapPalette.Sample(label),
                MarkerLineColor = MapPalette.Sample(label),
                MarkerSize = 7,
            });
        }

        var crossingKinds = new SortedDictionary<string, int>(StringComparer.Ordinal);
        foreach (var (kind, shape, color, size) in new[]
                 {
                     (CrossingKind.Fold, MarkerShape.FilledDiamond, MapPalette.Crossing, 6f),
                     (CrossingKind.FoldAtInfinity, MarkerShape.FilledTriangleUp, MapPalette.Crossing, 6f),
                     (CrossingKind.Passage, MarkerShape.OpenCircle, MapPalette.Passage, 5f),
                 })
        {
            var points = crossings.Where(c => c.Kind == kind).ToArray();
            if (points.Length == 0)
            {
                continue;
            }

            var name = AtlasContent.KindName(kind);
            crossingKinds[name] = points.Length;
            plot.Add.Markers(
                points.Select(c => c.Point[slice.XIndex]).ToArray(),
                points.Select(c => c.Point[slice.YIndex]).ToArray(),
                shape,
                size,
                color);
            plot.Legend.ManualItems.Add(new LegendItem
            {
                LabelText = $"{name.Replace('-', ' ')}  ({points.Length})",
                MarkerShape = shape,
                MarkerFillColor = color,
                MarkerLineColor = color,
                MarkerSize = size + 1,
            });
        }

        plot.Axes.SetLimits(slice.X.Low, slice.X.High, slice.Y.Low, slice.Y.High);
        plot.XLabel(slice.X.Name, 16);
        plot.YLabel(slice.Y.Name, 16);
        plot.Title(Title(snapshot, slice), 15);
        plot.Legend.FontSize = 13;
        plot.Legend.FontName = "DejaVu Sans";
        plot.Legend.BackgroundColor = Color.FromHex("#FFFFFF");
        plot.Legend.OutlineColor = MapPalette.Ink.WithAlpha(90);
        plot.Legend.ShadowColor = Colors.Transparent;
        plot.ShowLegend(Edge.Right);

        var png = plot.GetImageBytes(options.Width, options.Height, ImageFormat.Png);
        var data = plot.LastRender.DataRect;
        var description = new MapDescription
        {
            AtlasId = snapshot.AtlasId,
            Version = snapshot.Version.Version,
            X = slice.X,
            Y = slice.Y,
            Fixed = [.. slice.FixedParameters.Select(f => f.Parameter)],
            Width = options.Width,
            Height = options.Height,
            DataArea = (data.Left, data.Top, data.Right, data.Bottom),
            SamplesShown = samples.Length,
            CrossingsShown = crossingKinds,
            Legend = legend,
            Regions = options.Regions?.Name ?? "nearest sample",
            Grid = (columns, rows),
        };
        return new MapImage(png, description);
    }

    /// <summary>
    /// The label of every background cell, row 0 at the top. Without a labeler: the nearest slab sample in the
    /// slice's coordinates scaled to the unit square, so that both axes weigh alike whatever their units.
    /// </summary>
    private static int[] BackgroundLabels(MapSlice slice, Sample[] samples, IRegionLabeler? labeler, int columns, int rows)
    {
        var labels = new int[columns * rows];
        var xSpan = slice.X.High - slice.X.Low;
        var ySpan = slice.Y.High - slice.Y.Low;
        NearestLabelGrid? nearest = null;
        if (labeler is null)
        {
            nearest = new NearestLabelGrid(
                [.. samples.Select(s => (s.Point[slice.XIndex] - slice.X.Low) / xSpan)],
                [.. samples.Select(s => (s.Point[slice.YIndex] - slice.Y.Low) / ySpan)]);
        }

        var point = new double[slice.Dimension];
        for (var row = 0; row < rows; row++)
        {
            var v = 1 - ((row + 0.5) / rows);
            for (var column = 0; column < columns; column++)
            {
                var u = (column + 0.5) / columns;
                if (nearest is not null)
                {
                    labels[(row * columns) + column] = samples[nearest.Nearest(u, v)].Label;
                }
                else
                {
                    slice.FullPoint(slice.X.Low + (u * xSpan), slice.Y.Low + (v * ySpan), point);
                    labels[(row * columns) + column] = labeler!.LabelAt(point);
                }
            }
        }

        return labels;
    }

    /// <summary>RGB bytes [row, column, channel] of the background image.</summary>
    private static byte[,,] Pixels(int[] labels, int columns, int rows)
    {
        var pixels = new byte[rows, columns, 3];
        var cache = new Dictionary<int, Color>();
        for (var row = 0; row < rows; row++)
        {
            for (var column = 0; column < columns; column++)
            {
                var label = labels[(row * columns) + column];
                if (!cache.TryGetValue(label, out var color))
                {
                    color = MapPalette.Region(label);
                    cache[label] = color;
                }

                pixels[row, column, 0] = color.R;
                pixels[row, column, 1] = color.G;
                pixels[row, column, 2] = color.B;
            }
        }

        return pixels;
    }

    /// <summary>Markers shrink as samples crowd: about a third of the mean spacing, from 2.5 to 7 pixels.</summary>
    private static float MarkerSize(MapOptions options, int samples)
    {
        var areaPerSample = (options.Width * 0.75 * options.Height * 0.8) / Math.Max(1, samples);
        return (float)Math.Clamp(0.35 * Math.Sqrt(areaPerSample), 2.5, 7);
    }

    private static string Title(AtlasSnapshot snapshot, MapSlice slice)
    {
        var name = string.IsNullOrWhiteSpace(snapshot.Family.Name) ? snapshot.AtlasId : snapshot.Family.Name;
        var title = $"{name}: real solutions by region (version {snapshot.Version.Version})";
        return slice.FixedParameters.Count == 0
            ? title
            : $"{title}\nslice {string.Join(", ", slice.FixedParameters.Select(f => Describe(f.Parameter)))}";
    }

    private static string Describe(MapFixedParameter parameter) =>
        string.Create(CultureInfo.InvariantCulture, $"{parameter.Name} = {parameter.Value:G6} ± {parameter.HalfWidth:G4}");

    private static string Count(int count, string noun) => count == 1 ? $"1 {noun}" : $"{count} {noun}s";
}
