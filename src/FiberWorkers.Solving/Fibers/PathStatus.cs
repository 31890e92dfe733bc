namespace FiberWorkers.Solving.Fibers;

/// <summary>How a path ended at t = 1.</summary>
public enum PathStatus
{
    /// <summary>At a finite solution where ∂F/∂x is well conditioned.</summary>
    Regular,

    /// <summary>At a finite solution where ∂F/∂x is singular (winding number above one or a huge condition number).</summary>
    Singular,

    /// <summary>At a solution at infinity of the homogenized system (the path diverged in C^n).</summary>
    AtInfinity,

    /// <summary>Tracking did not finish; see <see cref="PathFailure"/>.</summary>
    Failed,
}

/// <summary>Why a path failed.</summary>
public enum PathFailure
{
    /// <summary>The path did not fail.</summary>
    None,

    /// <summary>The step size fell below its minimum (often: the path ran into a singularity).</summary>
    StepSizeUnderflow,

    /// <summary>The step budget ran out.</summary>
    TooManySteps,

    /// <summary>The Jacobian became exactly singular or the values non-finite.</summary>
    SingularJacobian,

    /// <summary>Endgame estimates at shrinking radii did not agree.</summary>
    EndgameDidNotConverge,

    /// <summary>The path did not close within the largest cycle number the endgame accepts.</summary>
    CycleNumberTooLarge,

    /// <summary>Two paths reached the same regular solution even after re-tracking with tighter settings.</summary>
    PathJumping,

    /// <summary>A real segment ended at a point where ∂F/∂x is (nearly) singular: the segment met the discriminant.</summary>
    IllConditionedEnd,
}

/// <summary>Wire and output names of statuses and failures.</summary>
public static class PathStatusNames
{
    /// <summary><c>regular</c>, <c>singular</c>, <c>at-infinity</c> or <c>failed</c>.</summary>
    public static string Name(this PathStatus status) => status switch
    {
        PathStatus.Regular => "regular",
        PathStatus.Singular => "singular",
        PathStatus.AtInfinity => "at-infinity",
        _ => "failed",
    };

    /// <summary>A short kebab-case reason, e.g. <c>step-size-underflow</c>.</summary>
    public static string Name(this PathFailure failure) => failure switch
    {
        PathFailure.None => "none",
        PathFailure.StepSizeUnderflow => "step-size-underflow",
        PathFailure.TooManySteps => "too-many-steps",
        PathFailure.SingularJacobian => "singular-jacobian",
        PathFailure.EndgameDidNotConverge => "endgame-did-not-converge",
        PathFailure.CycleNumberTooLarge => "cycle-number-too-large",
        PathFailure.PathJumping => "path-jumping",
        _ => "ill-conditioned-end",
    };
}
