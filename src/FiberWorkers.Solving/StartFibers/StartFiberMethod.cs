namespace FiberWorkers.Solving.StartFibers;

/// <summary>How a start fiber is computed.</summary>
public enum StartFiberMethod
{
    /// <summary>Choose from the Bézout number (see <see cref="StartFiberFactory.Choose"/>).</summary>
    Auto,

    /// <summary>The total-degree homotopy: Π dᵢ paths.</summary>
    TotalDegree,

    /// <summary>Monodromy loops in parameter space.</summary>
    Monodromy,
}
