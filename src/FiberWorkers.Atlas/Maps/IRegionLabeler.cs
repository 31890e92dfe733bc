namespace FiberWorkers.Atlas.Maps;

/// <summary>
/// Labels any point of the parameter box with a real count. A map draws its background regions with one when
/// <see cref="MapOptions.Regions"/> names it (a trained classifier, for example); without one the background is the
/// label of the nearest sample in the slice.
/// </summary>
public interface IRegionLabeler
{
    /// <summary>A short name for the map's description, e.g. <c>knn (k = 5)</c>.</summary>
    string Name { get; }

    /// <summary>The label at a full parameter point (one value per family parameter, in family order).</summary>
    int LabelAt(ReadOnlySpan<double> point);
}
