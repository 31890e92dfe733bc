namespace FiberWorkers.Fuzz.Tests.Engine;

/// <summary>What a finding is: the property failed (a wrong exception, a broken invariant) or an input did not finish.</summary>
internal enum FuzzFindingKind
{
    /// <summary>The check let an exception escape.</summary>
    Failure,

    /// <summary>The input ran past the per-input time bound.</summary>
    Hang,
}

/// <summary>One input that broke the property, with its smallest known reproducer and where both were saved.</summary>
/// <param name="Kind">Failure or hang.</param>
/// <param name="Index">The input's index in the run: with the same seed, <c>FIBER_FUZZ_INPUT=index</c> replays it.</param>
/// <param name="Signature">Exception type and message with digits blanked: findings with the same signature are one bug.</param>
/// <param name="Description">The exception (type, message, the top of its stack) or the hang's duration.</param>
/// <param name="Input">The input as generated.</param>
/// <param name="Minimized">A smaller input failing with the same signature (the input itself for hangs).</param>
/// <param name="SavedPath">Where <see cref="Minimized"/> was written (the original sits beside it).</param>
internal sealed record FuzzFinding(
    FuzzFindingKind Kind, long Index, string Signature, string Description, byte[] Input, byte[] Minimized, string SavedPath);
