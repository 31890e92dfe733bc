using System.Numerics;
using FiberWorkers.Solving.Certification;

namespace FiberWorkers.Solving.Fibers;

/// <summary>One distinct regular finite solution of a fiber, refined and certified.</summary>
public sealed record FiberPoint
{
    /// <summary>The solution, one entry per unknown.</summary>
    public required Complex[] Values { get; init; }

    /// <summary>The path that reached it.</summary>
    public required int PathIndex { get; init; }

    /// <summary>‖F(x; p)‖∞ after refinement.</summary>
    public required double Residual { get; init; }

    /// <summary>Estimate of κ₁(∂F/∂x).</summary>
    public required double Condition { get; init; }

    /// <summary>The alpha-theory certificate.</summary>
    public required Certificate Certificate { get; init; }

    /// <summary>Certified distinct from every other solution of the fiber.</summary>
    public required bool Distinct { get; init; }

    /// <summary>Real, by the certificate when decided, otherwise by the size of the imaginary parts.</summary>
    public bool IsReal => Certificate.Reality == Reality.Real
        || (Certificate.Reality is Reality.Undecided or Reality.NotApplicable && MaxImaginary <= 1e-8 * (1 + MaxModulus));

    /// <summary>Approximate zero, certified distinct, and (for real systems) with its reality decided.</summary>
    public bool Certified => Certificate.ApproximateZero && Distinct && Certificate.Reality != Reality.Undecided;

    private double MaxImaginary => Values.Length == 0 ? 0 : Values.Max(v => Math.Abs(v.Imaginary));

    private double MaxModulus => Values.Length == 0 ? 0 : Values.Max(v => v.Magnitude);
}
