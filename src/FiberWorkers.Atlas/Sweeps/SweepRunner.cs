using System.Diagnostics;
using FiberWorkers.Algebra.Families;
using FiberWorkers.Atlas.Stores;
using FiberWorkers.Atlas.Tiles;
using FiberWorkers.Contracts.V1;
using FiberWorkers.Solving.StartFibers;
using Google.Protobuf;

namespace FiberWorkers.Atlas.Sweeps;

/// <summary>
/// Computes one tile somewhere else (a cluster's workers); the result must be what <see cref="TileComputer.Compute"/>
/// returns for the same context and key. The returned task completes once the tile is computed and checked.
/// </summary>
public delegate Task<(TileResult Result, long PathsTracked)> RemoteTileSource(SweepContext context, long sweepId, TileKey key, CancellationToken cancellation);

/// <summary>
/// Runs a sweep on one machine (or, with a <see cref="RemoteTileSource"/>, on a cluster's workers): start fibers (computed once and kept in the store), level-0 tiles in parallel,
/// refinement of tiles that contain crossings, and the commit of a new atlas version. Every finished tile is written
/// at once, so an interrupted sweep resumes with the missing tiles when run again with the same options.
/// </summary>
public sealed class SweepRunner
{
    private readonly IAtlasStore _store;
    private readonly Action<TileMerge>? _merged;

    /// <param name="store">Where tiles and versions go.</param>
    /// <param name="merged">Told about every tile kept in the sweep (under the runner's lock: keep it short).</param>
    public SweepRunner(IAtlasStore store, Action<TileMerge>? merged = null)
    {
        ArgumentNullException.ThrowIfNull(store);
        _store = store;
        _merged = merged;
    }

    /// <summary>The atlas id of a family in a store: "a" and the first 15 hex digits of its content hash.</summary>
    public static string AtlasIdOf(FamilyDefinition family)
    {
        ArgumentNullException.ThrowIfNull(family);
        return $"a{family.ContentHash[..15]}";
    }

    /// <summary>
    /// Put before <see cref="AtlasIdOf"/> to give the id this runner's sweeps write to (a cluster's tenant, e.g.
    /// "acme/"); null (the default): none.
    /// </summary>
    public string? AtlasNamespace { get; init; }

    /// <summary>Runs (or resumes) the sweep on this machine and commits its version.</summary>
    public SweepSummary Run(FamilyDefinition family, SweepOptions options, IProgress<SweepProgress>? progress = null, CancellationToken cancellation = default) =>
        RunAsync(family, options, null, progress, cancellation).GetAwaiter().GetResult();

    /// <summary>
    /// Records the atlas and opens (or finds) the running sweep for these options, without computing anything;
    /// <see cref="RunAsync"/> with the same family and options continues that sweep.
    /// </summary>
    public (string AtlasId, long SweepId) Begin(FamilyDefinition family, SweepOptions options)
    {
        ArgumentNullException.ThrowIfNull(family);
        ArgumentNullException.ThrowIfNull(options);
        CheckSweepable(family, options);
        var atlasId = AtlasNamespace + AtlasIdOf(family);
        _store.EnsureAtlas(atlasId, family.ContentHash, JsonFormatter.Default.Format(family.Message));
        var parent = _store.Versions(atlasId).LastOrDefault()?.Version;
        return (atlasId, _store.BeginOrResumeSweep(atlasId, options.CanonicalText, parent).SweepId);
    }

    /// <summary>
    /// Runs (or resumes) the sweep and commits its version. Tiles are computed on this machine, or by
    /// <paramref name="remote"/> when given (all missing tiles of a level are requested at once; the source bounds
    /// its own concurrency). Either way the content, and so the content hash, is the same.
    /// </summary>
    public async Task<SweepSummary> RunAsync(
        FamilyDefinition family, SweepOptions options, RemoteTileSource? remote, IProgress<SweepProgress>? progress = null, CancellationToken cancellation = default)
    {
        ArgumentNullException.ThrowIfNull(family);
        ArgumentNullException.ThrowIfNull(options);
        CheckSweepable(family, options);
        var clock = Stopwatch.StartNew();
        var atlasId = AtlasNamespace + AtlasIdOf(family);
        _store.EnsureAtlas(atlasId, family.ContentHash, JsonFormatter.Default.Format(family.Message));
        progress?.Report(new SweepProgress("start fibers", 0, 0, 0, 0, 0, null));
        var context = SweepContext.Create(family, options, kind => LoadStartFiber(family, options, kind), message => progress?.Report(new SweepProgress(message, 0, 0, 0, 0, 0, null)));
        SaveStartFiber(family, options, "family", context.FamilyStart);
        SaveStartFiber(family, options, "folds", context.FoldStart);
        SaveStartFiber(family, options, "passages", context.PassageStart);

        var parent = _store.Versions(atlasId).LastOrDefault()?.Version;
        var (sweepId, finished) = _store.BeginOrResumeSweep(atlasId, options.CanonicalText, parent);
        var results = new Dictionary<string, TileResult>(StringComparer.Ordinal);
        foreach (var (key, hash) in finished)
        {
            results[key] = TileResult.Parser.ParseFrom(_store.Tile(hash).Payload);
        }

        var state = new RunState(clock, finished.Count);
        var planned = LevelZero(options.Divisions);
        state.Planned = planned.Count;
        await Compute(context, sweepId, planned, results, state, progress, "level 0", remote, cancellation).ConfigureAwait(false);
        var current = planned;
        for (var level = 1; level <= options.RefineDepth; level++)
        {
            var children = current
                .Where(k => results[k.ToString()].Crossings.Any(c => c.Kind is CrossingKind.Fold or CrossingKind.FoldAtInfinity))
                .SelectMany(k => k.Children())
                .Order()
                .ToList();
            if (options.SampleBudget is { } budget)
            {
                // Deterministic cut: the expected samples per tile at the previous level decide how many children fit.
                var samples = results.Values.Sum(r => (long)r.Samples.Count);
                var perTile = Math.Max(1.0, (double)current.Sum(k => results[k.ToString()].Samples.Count) / Math.Max(1, current.Count));
                var allowed = (int)Math.Max(0, Math.Floor((budget - samples) / perTile));
                children = [.. children.Take(allowed)];
            }

            if (children.Count == 0)
            {
                break;
            }

            state.Planned += children.Count;
            await Compute(context, sweepId, children, results, state, progress, $"level {level}", remote, cancellation).ConfigureAwait(false);
            current = children;
        }

        progress?.Report(new SweepProgress("commit", results.Count, state.Planned, state.Samples, state.Crossings, 0, TimeSpan.Zero));
        var version = _store.CommitSweep(sweepId, "sweep", tiles =>
        {
            var contents = tiles.Select(t => results.TryGetValue(t.Key, out var known) && StoredHash(known) == t.Value
                ? known
                : TileResult.Parser.ParseFrom(_store.Tile(t.Value).Payload));
            var (samples, crossings, labels, kinds, flags) = AtlasContent.Count(contents);
            return (AtlasContent.Hash(family.ContentHash, options.CanonicalText, tiles), AtlasContent.SummaryJson(tiles.Count, samples, crossings, labels, kinds, flags));
        });
        return Summarize(atlasId, version, state, clock.Elapsed, context.Decisions);
    }

    /// <summary>The summary of a committed version, read back from the store.</summary>
    public SweepSummary Summarize(string atlasId, int version, RunState? state = null, TimeSpan elapsed = default, IReadOnlyList<string>? decisions = null)
    {
        var info = _store.Versions(atlasId).Single(v => v.Version == version);
        var tiles = _store.VersionTiles(atlasId, version);
        var (samples, crossings, labels, kinds, flags) = AtlasContent.Count(tiles.Values.Select(h => TileResult.Parser.ParseFrom(_store.Tile(h).Payload)));
        return new SweepSummary
        {
            AtlasId = atlasId,
            AtlasVersion = version,
            Tiles = tiles.Count,
            Samples = samples,
            Crossings = crossings,
            Labels = labels,
            Kinds = kinds,
            Flags = flags,
            ContentHash = info.ContentHash,
            TilesComputed = state?.Computed ?? 0,
            PathsTracked = state?.Paths ?? 0,
            Elapsed = elapsed,
            StartFibers = decisions ?? [],
        };
    }

    private async Task Compute(
        SweepContext context, long sweepId, List<TileKey> keys, Dictionary<string, TileResult> results, RunState state,
        IProgress<SweepProgress>? progress, string stage, RemoteTileSource? remote, CancellationToken cancellation)
    {
        var missing = keys.Where(k => !results.ContainsKey(k.ToString())).ToList();
        progress?.Report(new SweepProgress(stage, results.Count, state.Planned, state.Samples, state.Crossings, 0, null));
        var gate = new Lock();
        void Keep(TileKey key, TileResult result, long paths)
        {
            var payload = result.ToByteArray();
            var hash = SqliteAtlasStore.HashOf(payload);
            lock (gate)
            {
                // A ledger merges each tile of a sweep once; a result that arrives twice (a retried tile whose first
                // attempt answered late) changes nothing.
                var merged = true;
                if (_store is ISweepLedger ledger)
                {
                    merged = ledger.MergeTile(sweepId, key.ToString(), hash, payload);
                }
                else
                {
                    _store.PutTile(sweepId, key.ToString(), hash, payload);
                }

                _merged?.Invoke(new TileMerge(sweepId, key.ToString(), hash, merged));

                results[key.ToString()] = result;
                state.Computed++;
                state.Paths += paths;
                state.Samples += result.Samples.Count;
                state.Crossings += result.Crossings.Count;
                var done = results.Count;
                var rate = state.Computed / Math.Max(1e-9, state.Clock.Elapsed.TotalSeconds);
                var remaining = rate > 0 ? TimeSpan.FromSeconds((state.Planned - done) / rate) : (TimeSpan?)null;
                progress?.Report(new SweepProgress(stage, done, state.Planned, state.Samples, state.Crossings, rate, remaining));
            }
        }

        if (remote is not null)
        {
            await Task.WhenAll(missing.Select(async key =>
            {
                var (result, paths) = await remote(context, sweepId, key, cancellation).ConfigureAwait(false);
                Keep(key, result, paths);
            })).ConfigureAwait(false);
            return;
        }

        Parallel.ForEach(
            missing,
            new ParallelOptions { MaxDegreeOfParallelism = Math.Max(1, context.Options.MaxDegreeOfParallelism), CancellationToken = cancellation },
            key =>
            {
                var (result, paths) = TileComputer.Compute(context, key);
                Keep(key, result, paths);
            });
    }

    private static void CheckSweepable(FamilyDefinition family, SweepOptions options)
    {
        if (family.Parameters.Count == 0)
        {
            throw new InputException(family.Source, "parameters", "a sweep needs at least one parameter with a box");
        }

        options.Validate(family.Parameters.Count);
    }

    private static string StoredHash(TileResult result) => SqliteAtlasStore.HashOf(result.ToByteArray());

    private static List<TileKey> LevelZero(IReadOnlyList<int> divisions)
    {
        var keys = new List<TileKey>();
        var coordinates = new int[divisions.Count];
        void Enumerate(int axis)
        {
            if (axis == divisions.Count)
            {
                keys.Add(new TileKey(0, (int[])coordinates.Clone()));
                return;
            }

            for (var i = 0; i < divisions[axis]; i++)
            {
                coordinates[axis] = i;
                Enumerate(axis + 1);
            }
        }

        Enumerate(0);
        keys.Sort();
        return keys;
    }

    private StartFiber? LoadStartFiber(FamilyDefinition family, SweepOptions options, string kind)
    {
        var bytes = _store.GetBlob(StartFiberKey(family, options, kind));
        return bytes is null ? null : StartFiberFile.Deserialize(bytes, $"start fiber '{kind}' in the atlas");
    }

    private void SaveStartFiber(FamilyDefinition family, SweepOptions options, string kind, StartFiber fiber) =>
        _store.PutBlob(StartFiberKey(family, options, kind), StartFiberFile.Serialize(fiber));

    /// <summary>Start fibers depend on the family, the kind, the seed (charts, generic point) and the method.</summary>
    public static string StartFiberKey(FamilyDefinition family, SweepOptions options, string kind) =>
        $"start-fiber/{family.ContentHash}/{kind}/{options.Seed}/{options.StartMethod}";

    /// <summary>Counters of one run.</summary>
    public sealed class RunState(Stopwatch clock, int resumed)
    {
        public Stopwatch Clock { get; } = clock;

        public int Resumed { get; } = resumed;

        public int Planned { get; set; }

        public int Computed { get; set; }

        public long Paths { get; set; }

        public long Samples { get; set; }

        public long Crossings { get; set; }
    }
}

/// <summary>A tile result kept in a sweep: <paramref name="Merged"/> is false when the sweep already held one.</summary>
public sealed record TileMerge(long SweepId, string TileKey, string TileHash, bool Merged);
