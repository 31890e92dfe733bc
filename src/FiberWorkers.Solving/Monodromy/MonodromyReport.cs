namespace FiberWorkers.Solving.Monodromy;

/// <summary>What a monodromy solve did and how sure it is of completeness.</summary>
public sealed record MonodromyReport
{
    /// <summary>Independent loops of the homotopy graph (edges − nodes + 1, summed over the searches run).</summary>
    public required int Loops { get; init; }

    /// <summary>Parameter points of the homotopy graph (the base point included).</summary>
    public required int Nodes { get; init; }

    /// <summary>Straight segments joining them.</summary>
    public required int Edges { get; init; }

    /// <summary>Loops added at the end that found nothing new.</summary>
    public required int LoopsWithoutNew { get; init; }

    /// <summary>Solutions tracked along an edge (one straight segment each).</summary>
    public required long SegmentTracks { get; init; }

    /// <summary>Segment tracks that failed or ended at a bad point (ignored).</summary>
    public required long FailedTracks { get; init; }

    /// <summary>True when auxiliary parameters q were added to the constant terms.</summary>
    public required bool Augmented { get; init; }

    /// <summary>Solutions found for the (augmented) base fiber before any final homotopy.</summary>
    public required int BaseRootCount { get; init; }

    /// <summary>Paths of the final homotopy from the augmented base point to q = 0 (0 when not augmented).</summary>
    public required int FinalPaths { get; init; }

    /// <summary>Paths of the trace test's pencils, over every run of the test (two per known solution each time).</summary>
    public long TracePaths { get; init; }

    /// <summary><c>expected-count</c>, <c>trace-test</c> or <c>stopping-rule</c>.</summary>
    public required string Completeness { get; init; }

    /// <summary>The trace test's verdict, or null when it does not apply.</summary>
    public TraceTestResult? TraceTest { get; init; }

    /// <summary>Why the trace test was not run, when it was not.</summary>
    public string? TraceTestSkipped { get; init; }
}

/// <summary>The linear trace test (Leykin, Rodriguez &amp; Sottile 2018) on one pencil of parallel hyperplanes.</summary>
/// <param name="Equation">The equation whose constant term was freed to make the curve (0-based).</param>
/// <param name="RelativeDeviation">‖T(σ₂) − T(0) − (σ₂/σ₁)(T(σ₁) − T(0))‖ / Σ‖xᵢ‖: zero for a complete fiber.</param>
/// <param name="Passed">Deviation below the tolerance.</param>
public sealed record TraceTestResult(int Equation, double RelativeDeviation, bool Passed);
