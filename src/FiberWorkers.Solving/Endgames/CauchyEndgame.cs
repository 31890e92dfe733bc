using System.Numerics;
using FiberWorkers.Solving.Tracking;

namespace FiberWorkers.Solving.Endgames;

/// <summary>How an endgame ended.</summary>
internal enum EndgameStatus
{
    /// <summary>Two successive Cauchy estimates agree; the estimate is the endpoint.</summary>
    Converged,

    /// <summary>
    /// The homogenizing coordinate decays like a power of s down to below 1e-7 of the point (or is negligible
    /// outright): the path goes to infinity.
    /// </summary>
    Diverging,

    /// <summary>
    /// The homogenizing coordinate decays like a power of s but stayed above 1e-7 of the point within the radii
    /// tried: the path very probably goes to infinity, but a very ill-conditioned finite end can look the same, so
    /// counts that rely on it are not certified.
    /// </summary>
    DivergingByDecay,

    /// <summary>No loop closed at any radius within the largest cycle number.</summary>
    CycleNumberTooLarge,

    /// <summary>The radii ran out before the estimates agreed.</summary>
    DidNotConverge,
}

/// <summary>Result of the endgame: the endpoint estimate at t = 1, the cycle number, and the steps spent.</summary>
internal readonly record struct EndgameOutcome(EndgameStatus Status, int CycleNumber, int Steps);

/// <summary>
/// The endgame near t = 1, where a path x(s), s = 1 − t, is a Puiseux series in s^(1/c). It samples the path at
/// radii s_k = s₀·λ^k. At each radius it first tests for divergence: in the projective chart the homogenizing
/// coordinate of a path to infinity decays like a power, |X₀|/‖X‖ ≈ C·s^q with q &gt; 0 (the fit is checked over
/// three radii). Otherwise it runs the Cauchy endgame (Morgan, Sommese &amp; Wampler 1991): it tracks around
/// |s| = s_k until the path closes after c loops and averages the samples at equally spaced angles, which
/// evaluates the Cauchy integral for x(0) with the trapezoid rule (spectrally accurate for this periodic analytic
/// integrand). Two agreeing estimates end it. Loops are tracked as chords between sample points, which stay at
/// distance ≥ s·cos(π/M) from t = 1.
/// </summary>
internal sealed class CauchyEndgame
{
    private readonly PathTracker _tracker;
    private readonly Complex[] _start;
    private readonly Complex[] _sum;
    private readonly Complex[] _previous;
    private readonly double[] _ratios;

    /// <summary>|X₀|/‖X‖ below this is zero to working precision.</summary>
    private const double NegligibleRatio = 1e-12;

    /// <summary>|X₀|/‖X‖ below this, reached while decaying, counts as certainly at infinity.</summary>
    private const double ConfidentRatio = 1e-7;

    public CauchyEndgame(PathTracker tracker, int maxLevels = 64)
    {
        _tracker = tracker;
        _start = new Complex[tracker.Dimension];
        _sum = new Complex[tracker.Dimension];
        _previous = new Complex[tracker.Dimension];
        _ratios = new double[maxLevels + 1];
    }

    /// <summary>
    /// Runs from <paramref name="x"/>, a point on the path at t = 1 − <paramref name="radius"/>. On convergence
    /// <paramref name="estimate"/> holds the endpoint; when diverging it holds the last sample.
    /// </summary>
    /// <param name="projective">True when coordinate 0 is the homogenizing one (divergence can be tested).</param>
    public EndgameOutcome Run(
        Span<Complex> x, double radius, Span<Complex> estimate, bool projective, EndgameOptions options, TrackerOptions trackerOptions)
    {
        var steps = 0;
        var cycle = 0;
        var haveEstimate = false;
        var anyLoopClosed = false;
        var levels = Math.Min(options.MaxLevels, _ratios.Length - 1);
        for (var level = 0; level <= levels; level++)
        {
            if (projective)
            {
                _ratios[level] = Ratio(x);
                if (IsDiverging(level, options.RadiusRatio))
                {
                    return ConfirmDivergence(x, radius, level, levels, estimate, cycle, steps, options, trackerOptions);
                }
            }

            // Loops cost M chords per turn; run them only where the path may end finitely: not while X₀ is
            // still decaying like a power of s (the test above settles those once the fit is consistent).
            if (!projective || (level >= 1 && !IsDecaying(level, options.RadiusRatio)))
            {
                var loops = Loops(x, radius, estimate, options, trackerOptions, ref steps);
                if (loops.Status == EndgameStatus.Converged)
                {
                    anyLoopClosed = true;
                    if (haveEstimate && loops.CycleNumber == cycle
                        && Distance(estimate, _previous) <= options.ConvergenceTolerance * (1 + PathTracker.MaxNorm(estimate)))
                    {
                        return new EndgameOutcome(EndgameStatus.Converged, cycle, steps);
                    }

                    cycle = loops.CycleNumber;
                    estimate.CopyTo(_previous);
                    haveEstimate = true;
                }
                else
                {
                    haveEstimate = false;
                }
            }

            if (level == levels)
            {
                break;
            }

            var next = radius * options.RadiusRatio;
            var inward = _tracker.Track(x, 1 - radius, 1 - next, trackerOptions);
            steps += inward.Steps + inward.Rejections;
            if (!inward.Completed)
            {
                break;
            }

            radius = next;
        }

        if (projective && IsDecaying(levels, options.RadiusRatio))
        {
            x.CopyTo(estimate);
            return new EndgameOutcome(EndgameStatus.DivergingByDecay, cycle, steps);
        }

        return new EndgameOutcome(anyLoopClosed ? EndgameStatus.DidNotConverge : EndgameStatus.CycleNumberTooLarge, cycle, steps);
    }

    /// <summary>
    /// Follows a path the decay fit calls divergent further in while X₀ keeps decaying, until |X₀|/‖X‖ is below
    /// <see cref="ConfidentRatio"/> (a finite end would need coordinates above 10⁷ times the chart's scale) or the
    /// radii or the decay run out; only the first counts as certainly at infinity.
    /// </summary>
    private EndgameOutcome ConfirmDivergence(
        Span<Complex> x, double radius, int level, int levels, Span<Complex> estimate, int cycle, int steps, EndgameOptions options, TrackerOptions trackerOptions)
    {
        while (_ratios[level] >= ConfidentRatio && level < levels)
        {
            var next = radius * options.RadiusRatio;
            var inward = _tracker.Track(x, 1 - radius, 1 - next, trackerOptions);
            steps += inward.Steps + inward.Rejections;
            if (!inward.Completed)
            {
                break;
            }

            radius = next;
            level++;
            _ratios[level] = Ratio(x);
            if (!(Exponent(level, options.RadiusRatio) > 0.05))
            {
                break;
            }
        }

        x.CopyTo(estimate);
        var status = _ratios[level] < ConfidentRatio ? EndgameStatus.Diverging : EndgameStatus.DivergingByDecay;
        return new EndgameOutcome(status, cycle, steps);
    }

    /// <summary>
    /// The homogenizing coordinate decays like a power of s: |X₀|/‖X‖ ≈ C·s^q, q &gt; 0, with three successive
    /// estimates of q agreeing within 25% (or X₀ is already negligible). A path to a finite point, however large,
    /// has q → 0 instead, so its estimates shrink and do not agree. High cycle numbers give small q (1/c), which
    /// is why no absolute threshold on |X₀| is used.
    /// </summary>
    private bool IsDiverging(int level, double radiusRatio)
    {
        if (_ratios[level] < NegligibleRatio)
        {
            return true;
        }

        if (level < 3)
        {
            return false;
        }

        var q1 = Exponent(level - 2, radiusRatio);
        var q2 = Exponent(level - 1, radiusRatio);
        var q3 = Exponent(level, radiusRatio);
        var low = Math.Min(q1, Math.Min(q2, q3));
        var high = Math.Max(q1, Math.Max(q2, q3));
        return low > 0.05 && high <= 1.25 * low;
    }

    /// <summary>The latest two exponent estimates are both clearly positive.</summary>
    private bool IsDecaying(int level, double radiusRatio) =>
        level >= 2 && Exponent(level, radiusRatio) > 0.05 && Exponent(level - 1, radiusRatio) > 0.05;

    /// <summary>q from the ratios at two successive radii: log(r_k / r_{k−1}) / log λ.</summary>
    private double Exponent(int level, double radiusRatio) =>
        _ratios[level - 1] <= 0 ? double.PositiveInfinity : Math.Log(_ratios[level] / _ratios[level - 1]) / Math.Log(radiusRatio);

    private EndgameOutcome Loops(
        Span<Complex> x, double radius, Span<Complex> estimate, EndgameOptions options, TrackerOptions trackerOptions, ref int steps)
    {
        x.CopyTo(_start);
        Array.Clear(_sum);
        var samples = options.SamplesPerLoop;
        var count = 0;
        for (var loop = 1; loop <= options.MaxCycleNumber; loop++)
        {
            for (var j = 0; j < samples; j++)
            {
                for (var i = 0; i < x.Length; i++)
                {
                    _sum[i] += x[i];
                }

                count++;
                var from = 1 - (radius * Complex.FromPolarCoordinates(1, 2 * Math.PI * j / samples));
                var to = 1 - (radius * Complex.FromPolarCoordinates(1, 2 * Math.PI * (j + 1) / samples));
                var chord = _tracker.Track(x, from, to, trackerOptions);
                steps += chord.Steps + chord.Rejections;
                if (!chord.Completed)
                {
                    _start.AsSpan().CopyTo(x);
                    return new EndgameOutcome(EndgameStatus.DidNotConverge, loop, steps);
                }
            }

            if (Distance(x, _start) <= options.LoopClosingTolerance * (1 + PathTracker.MaxNorm(x)))
            {
                for (var i = 0; i < x.Length; i++)
                {
                    estimate[i] = _sum[i] / count;
                }

                // Continue from the exact sample point rather than the loop's slightly drifted end.
                _start.AsSpan().CopyTo(x);
                return new EndgameOutcome(EndgameStatus.Converged, loop, steps);
            }
        }

        _start.AsSpan().CopyTo(x);
        return new EndgameOutcome(EndgameStatus.CycleNumberTooLarge, options.MaxCycleNumber, steps);
    }

    private static double Ratio(ReadOnlySpan<Complex> homogeneous)
    {
        var norm = PathTracker.MaxNorm(homogeneous);
        return norm == 0 ? 0 : Complex.Abs(homogeneous[0]) / norm;
    }

    private static double Distance(ReadOnlySpan<Complex> a, ReadOnlySpan<Complex> b)
    {
        var distance = 0.0;
        for (var i = 0; i < a.Length; i++)
        {
            distance = Math.Max(distance, Complex.Abs(a[i] - b[i]));
        }

        return distance;
    }
}
