namespace FiberWorkers.Atlas.Stores;

/// <summary>
/// What a coordinator records beyond the atlas itself: the requests of the sweeps it runs (so a restarted coordinator
/// resumes them), every attempt at a tile, and merges that happen at most once per tile of a sweep. Implemented by the
/// embedded SQLite store and by the PostgreSQL store for clusters; both are safe for concurrent callers in one process.
/// </summary>
public interface ISweepLedger : IAtlasStore
{
    /// <summary>
    /// Keeps the request that started a sweep (an encoded <c>SubmitSweepRequest</c>); the first write for a sweep wins.
    /// The sweep must exist (<see cref="IAtlasStore.BeginOrResumeSweep"/>) and belong to <paramref name="atlasId"/>.
    /// </summary>
    void SaveSweepRequest(long sweepId, string atlasId, byte[] request);

    /// <summary>The kept requests of sweeps that have not committed a version yet, oldest first.</summary>
    IReadOnlyList<SweepRequestRecord> UnfinishedSweepRequests();

    /// <summary>The state of a sweep, or null when the store has no such sweep.</summary>
    SweepRecord? Sweep(long sweepId);

    /// <summary>
    /// Stores a tile result (once per content hash) and records it in the sweep, in one transaction, unless the sweep
    /// already holds a result for that tile key: then nothing changes. Returns true when the tile was merged now.
    /// </summary>
    /// <remarks>
    /// Of concurrent calls for one (sweep, tile key), exactly one returns true, whatever hashes they carry. A committed
    /// sweep takes no more tiles (false, nothing changes); an unknown sweep is an <see cref="InvalidOperationException"/>,
    /// and a hash that is not the payload's SHA-256 an <see cref="ArgumentException"/>.
    /// </remarks>
    bool MergeTile(long sweepId, string tileKey, string tileHash, byte[] payload);

    /// <summary>
    /// Appends one attempt at a tile. The start time is kept in UTC to the microsecond; an unknown sweep is an
    /// <see cref="InvalidOperationException"/>, an outcome outside the list below an <see cref="ArgumentException"/>.
    /// </summary>
    void RecordAttempt(TileAttempt attempt);

    /// <summary>Every attempt recorded for a sweep, in the order recorded.</summary>
    IReadOnlyList<TileAttempt> Attempts(long sweepId);
}

/// <summary>A kept sweep request.</summary>
public sealed record SweepRequestRecord(long SweepId, string AtlasId, byte[] Request);

/// <summary>A sweep as stored: <paramref name="State"/> is <c>running</c> or <c>committed</c>.</summary>
/// <param name="Version">The version the sweep committed, or null while it runs.</param>
public sealed record SweepRecord(long SweepId, string AtlasId, string OptionsText, int? Parent, string State, int? Version, int FinishedTiles);

/// <summary>
/// One attempt at a tile. <paramref name="Outcome"/> is one of <c>merged</c> (the result was new and kept),
/// <c>duplicate</c> (a result for the tile was already merged), <c>failed</c> (an error or invalid answer),
/// <c>timeout</c> (no answer before the deadline), <c>busy</c> (the worker refused it: all its tile threads were
/// busy), <c>lost</c> (the worker disappeared), or <c>returned</c> (the worker was stopping: it refused the tile or
/// handed it back unfinished, and the tile went to another worker).
/// </summary>
public sealed record TileAttempt(
    long SweepId, string TileKey, int Attempt, string Worker, DateTimeOffset Started, double Seconds, string Outcome, string Detail);
