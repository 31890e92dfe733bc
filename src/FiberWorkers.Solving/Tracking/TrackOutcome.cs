namespace FiberWorkers.Solving.Tracking;

/// <summary>How tracking one segment ended.</summary>
internal enum TrackStatus
{
    /// <summary>Reached the end of the segment.</summary>
    Completed,

    /// <summary>The step size fell below its minimum.</summary>
    StepSizeUnderflow,

    /// <summary>The step budget ran out.</summary>
    TooManySteps,

    /// <summary>The Jacobian became singular or the values non-finite.</summary>
    SingularJacobian,
}

/// <summary>Result of tracking one segment: status, where on it tracking stopped (0..1), and work done.</summary>
internal readonly record struct TrackOutcome(TrackStatus Status, double Reached, int Steps, int Rejections, double LastStepSize)
{
    public bool Completed => Status == TrackStatus.Completed;
}
