namespace FiberWorkers.Algebra.Families;

/// <summary>One parameter's name and the interval [Low, High] a sweep covers (Low &lt; High).</summary>
public sealed record ParameterBox(string Name, double Low, double High)
{
    /// <summary>High − Low.</summary>
    public double Width => High - Low;

    /// <summary>True when Low ≤ value ≤ High.</summary>
    public bool Contains(double value) => value >= Low && value <= High;
}
