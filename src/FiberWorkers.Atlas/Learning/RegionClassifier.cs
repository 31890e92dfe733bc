namespace FiberWorkers.Atlas.Learning;

/// <summary>Predicts the label (real count) at a parameter point from an atlas's samples.</summary>
public abstract class RegionClassifier
{
    /// <summary><c>nn1</c>, <c>knn</c> or <c>net</c>.</summary>
    public abstract string Name { get; }

    /// <summary>The label at a point given in normalized coordinates. Thread-safe.</summary>
    public abstract int Classify(ReadOnlySpan<double> normalized);
}
