using FiberWorkers.Algebra.Families;
using FiberWorkers.Atlas.Learning;

namespace FiberWorkers.Atlas.Maps;

/// <summary>
/// Draws a map's regions with a trained classifier: the classifier's decision at each background cell, the point
/// mapped into the box-normalized coordinates the classifier was trained in.
/// </summary>
public sealed class ClassifierRegions : IRegionLabeler
{
    private readonly RegionClassifier _classifier;
    private readonly IReadOnlyList<ParameterBox> _box;

    public ClassifierRegions(RegionClassifier classifier, IReadOnlyList<ParameterBox> box)
    {
        ArgumentNullException.ThrowIfNull(classifier);
        ArgumentNullException.ThrowIfNull(box);
        _classifier = classifier;
        _box = box;
    }

    /// <inheritdoc />
    public string Name => $"model {_classifier.Name}";

    /// <inheritdoc />
    public int LabelAt(ReadOnlySpan<double> point)
    {
        ArgumentOutOfRangeException.ThrowIfNotEqual(point.Length, _box.Count);
        Span<double> normalized = point.Length <= 16 ? stackalloc double[point.Length] : new double[point.Length];
        for (var k = 0; k < point.Length; k++)
        {
            normalized[k] = (point[k] - _box[k].Low) / _box[k].Width;
        }

        return _classifier.Classify(normalized);
    }
}
