using System.Numerics;
using FiberWorkers.Solving.Endgames;
using FiberWorkers.Solving.Homotopies;
using FiberWorkers.Solving.Tracking;

namespace FiberWorkers.Solving.Fibers;

/// <summary>
/// Runs one path of a projective homotopy from t = 0 to t = 1: tracks to the endgame zone, finishes directly
/// when the path is well conditioned there, and otherwise runs the Cauchy endgame; then classifies the end as
/// regular, singular, at infinity or failed. One runner per thread.
/// </summary>
internal sealed class PathRunner
{
    /// <summary>|X₀| / ‖X‖∞ above this (affine size below ~10⁴) counts as clearly finite for the direct finish.</summary>
    private const double ClearlyFiniteRatio = 1e-4;

    private readonly PathTracker _tracker;
    private readonly CauchyEndgame _endgame;
    private readonly EndgameOptions _endgameOptions;
    private readonly Complex[] _x;
    private readonly Complex[] _saved;
    private readonly Complex[] _estimate;

    public PathRunner(IHomotopy homotopy, EndgameOptions endgameOptions)
    {
        _tracker = new PathTracker(homotopy);
        _endgame = new CauchyEndgame(_tracker);
        _endgameOptions = endgameOptions;
        _x = new Complex[homotopy.Dimension];
        _saved = new Complex[homotopy.Dimension];
        _estimate = new Complex[homotopy.Dimension];
    }

    public PathResult Run(int index, ReadOnlySpan<Complex> start, TrackerOptions options)
    {
        var x = _x.AsSpan();
        start.CopyTo(x);
        var zone = _endgameOptions.StartRadius;
        var approach = _tracker.Track(x, 0, 1 - zone, options);
        var steps = approach.Steps;
        var rejections = approach.Rejections;
        if (!approach.Completed)
        {
            return Failed(index, Failure(approach.Status), steps, rejections, approach.Reached * (1 - zone));
        }

        x.CopyTo(_saved);
        var condition = _tracker.ProjectiveCondition(x, 1 - zone);
        if (condition <= _endgameOptions.DirectConditionLimit && InfinityRatio(x) > ClearlyFiniteRatio)
        {
            var finish = _tracker.Track(x, 1 - zone, 1, options, _endgameOptions.DirectStepBudget);
            steps += finish.Steps;
            rejections += finish.Rejections;
            if (finish.Completed)
            {
                // The direct finish only vouches for ends as clearly finite as its start: a path into a singular
                // point at infinity can still be tracked to t = 1 with collapsing steps and end with a tiny X₀ and a
                // condition just under the singular limit. Such ends go to the endgame, which tests divergence.
                _tracker.Refine(x, 1, 4, 1e-15);
                var endCondition = _tracker.ProjectiveCondition(x, 1);
                if (endCondition <= _endgameOptions.SingularConditionLimit && InfinityRatio(x) > ClearlyFiniteRatio)
                {
                    return Finished(index, x, 1, steps, rejections, singular: false);
                }
            }

            _saved.AsSpan().CopyTo(x);
        }

        var outcome = _endgame.Run(x, zone, _estimate, projective: true, _endgameOptions, options);
        steps += outcome.Steps;
        return outcome.Status switch
        {
            EndgameStatus.Converged => Classify(index, outcome.CycleNumber, steps, rejections),
            EndgameStatus.Diverging => Diverged(index, outcome.CycleNumber, steps, rejections, byDecay: false),
            EndgameStatus.DivergingByDecay => Diverged(index, outcome.CycleNumber, steps, rejections, byDecay: true),
            EndgameStatus.CycleNumberTooLarge => Failed(index, PathFailure.CycleNumberTooLarge, steps, rejections, 1 - zone),
            _ => Failed(index, PathFailure.EndgameDidNotConverge, steps, rejections, 1 - zone),
        };
    }

    private PathResult Classify(int index, int cycle, int steps, int rejections)
    {
        var estimate = _estimate.AsSpan();
        if (cycle == 1 && InfinityRatio(estimate) > _endgameOptions.InfinityThreshold)
        {
            // A winding number of one can still be a regular endpoint that was merely ill conditioned on the way.
            estimate.CopyTo(_x);
            var step = _tracker.Refine(_x, 1, 6, 1e-15);
            if (double.IsFinite(step) && _tracker.ProjectiveCondition(_x, 1) <= _endgameOptions.SingularConditionLimit)
            {
                return Finished(index, _x, cycle, steps, rejections, singular: false);
            }
        }

        return Finished(index, estimate, cycle, steps, rejections, singular: true);
    }

    private PathResult Diverged(int index, int cycle, int steps, int rejections, bool byDecay) => new()
    {
        Index = index,
        Status = PathStatus.AtInfinity,
        InfinityByDecay = byDecay,
        HomogeneousEndpoint = _estimate.ToArray(),
        Steps = steps,
        Rejections = rejections,
        CycleNumber = Math.Max(cycle, 1),
    };

    private PathResult Finished(int index, ReadOnlySpan<Complex> homogeneous, int cycle, int steps, int rejections, bool singular)
    {
        var ratio = InfinityRatio(homogeneous);
        var atInfinity = ratio <= (singular ? _endgameOptions.SingularInfinityThreshold : _endgameOptions.InfinityThreshold);
        Complex[]? affine = null;
        if (!atInfinity)
        {
            affine = new Complex[homogeneous.Length - 1];
            for (var i = 1; i < homogeneous.Length; i++)
            {
                affine[i - 1] = homogeneous[i] / homogeneous[0];
            }
        }

        return new PathResult
        {
            Index = index,
            Status = atInfinity ? PathStatus.AtInfinity : singular ? PathStatus.Singular : PathStatus.Regular,
            Endpoint = affine,
            HomogeneousEndpoint = homogeneous.ToArray(),
            Steps = steps,
            Rejections = rejections,
            CycleNumber = cycle,
        };
    }

    private static PathResult Failed(int index, PathFailure failure, int steps, int rejections, double reached) => new()
    {
        Index = index,
        Status = PathStatus.Failed,
        Failure = failure,
        Steps = steps,
        Rejections = rejections,
        Reached = reached,
    };

    internal static PathFailure Failure(TrackStatus status) => status switch
    {
        TrackStatus.StepSizeUnderflow => PathFailure.StepSizeUnderflow,
        TrackStatus.TooManySteps => PathFailure.TooManySteps,
        _ => PathFailure.SingularJacobian,
    };

    /// <summary>|X₀| / ‖X‖∞: how close a homogeneous point is to the hyperplane at infinity.</summary>
    private static double InfinityRatio(ReadOnlySpan<Complex> homogeneous)
    {
        var norm = PathTracker.MaxNorm(homogeneous);
        return norm == 0 ? 0 : Complex.Abs(homogeneous[0]) / norm;
    }
}
