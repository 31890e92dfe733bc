using System.Collections.Concurrent;
using FiberWorkers.Algebra.Families;
using FiberWorkers.Atlas.Stores;
using FiberWorkers.Contracts.V1;
using Google.Protobuf;

namespace FiberWorkers.Cluster.Tests.Stores;

/// <summary>
/// What every sweep ledger must do, run against each store (<see cref="SqliteLedgerContractTests"/>,
/// <see cref="PostgresLedgerContractTests"/>): numbered immutable versions sharing their parent's tiles by the sweep
/// options rule, merges at most once per tile, attempts and kept requests, resuming after a reopen, and payload
/// checksums. Each test gets storage of its own.
/// </summary>
public abstract class LedgerContractTests : IDisposable
{
    private const string AtlasId = "a-contract";

    /// <summary>Opens the store under test; called again, it reopens the same storage.</summary>
    protected abstract ISweepLedger Open();

    /// <summary>Flips one byte of a stored tile payload behind the store's back (raw SQL).</summary>
    protected abstract void CorruptPayload(string tileHash);

    /// <summary>What a damage error calls the storage: "atlas file" or "database".</summary>
    protected abstract string Container { get; }

    /// <inheritdoc />
    public abstract void Dispose();

    [Fact]
    public void Versions_count_from_one_and_share_the_parents_grid_only_under_the_same_options_and_derived_tiles_always()
    {
        using var store = OpenWithAtlas();
        var seen = new List<IReadOnlyDictionary<string, string>>();
        (string, string) Describe(IReadOnlyDictionary<string, string> tiles)
        {
            // As the sweep runner does: the description reads the version's tiles back through the store.
            Assert.All(tiles, t => Assert.Equal(t.Value, AtlasStoreRules.HashOf(store.Tile(t.Value).Payload)));
            seen.Add(new Dictionary<string, string>(tiles));
            return ($"content-{seen.Count}", $"{{\"tiles\":{tiles.Count}}}");
        }

        var a00 = Tile("L0:0,0", 1);
        var a10 = Tile("L0:1,0", 1);
        var b10 = Tile("L0:1,0", 2);
        var c00 = Tile("L0:0,0", 3);
        var learned = Tile("learned:v4", 4);

        // v1: options A, two tiles. v2: options A again, one tile recomputed: the other comes from v1.
        var v1 = Sweep(store, "opts-A", null, [a00, a10], Describe);
        var v2 = Sweep(store, "opts-A", v1, [b10], Describe);

        // v3: options B: v2's grid is of other options and is not shared.
        var v3 = Sweep(store, "opts-B", v2, [c00], Describe);

        // v4: derived from v3 (a learned tile); v5: options B again, over v4: v3's grid (found through v4) and the
        // learned tile are shared. v6: options A over v5: only the learned tile is.
        var v4 = store.CommitDerived(AtlasId, v3, "learned", "learned:1 resolved samples", [Added(learned)], ("model/{version}", [4, 4]), Describe);
        var v5 = Sweep(store, "opts-B", v4, [], Describe);
        var v6 = Sweep(store, "opts-A", v5, [], Describe);

        Assert.Equal([1, 2, 3, 4, 5, 6], new[] { v1, v2, v3, v4, v5, v6 });
        Assert.Equal(Map(a00, a10), seen[0]);
        Assert.Equal(Map(a00, b10), seen[1]);
        Assert.Equal(Map(c00), seen[2]);
        Assert.Equal(Map(c00, learned), seen[3]);
        Assert.Equal(Map(c00, learned), seen[4]);
        Assert.Equal(Map(learned), seen[5]);
        for (var version = 1; version <= 6; version++)
        {
            Assert.Equal(seen[version - 1].OrderBy(t => t.Key), store.VersionTiles(AtlasId, version).OrderBy(t => t.Key));
        }

        var versions = store.Versions(AtlasId);
        Assert.Equal([null, 1, 2, 3, 4, 5], versions.Select(v => v.Parent));
        Assert.Equal(["sweep", "sweep", "sweep", "learned", "sweep", "sweep"], versions.Select(v => v.Kind));
        Assert.Equal(["opts-A", "opts-A", "opts-B", "learned:1 resolved samples", "opts-B", "opts-A"], versions.Select(v => v.Options));
        Assert.Equal(Enumerable.Range(1, 6).Select(i => $"content-{i}"), versions.Select(v => v.ContentHash));
        Assert.Equal("{\"tiles\":2}", versions[3].Summary);
        Assert.Equal([4, 4], store.GetBlob("model/4"));
        Assert.Equal(b10.Payload, store.Tile(b10.TileHash).Payload);
        Assert.Equal(a10.Payload, store.Tile(a10.TileHash).Payload);
    }

    [Fact]
    public void Committed_versions_stay_as_they_were_and_the_sweep_records_its_version()
    {
        using var store = OpenWithAtlas();
        var first = Sweep(store, "opts-A", null, [Tile("L0:0,0", 1)], Fixed);
        var before = store.Versions(AtlasId).Single();
        var beforeTiles = store.VersionTiles(AtlasId, first);

        var (sweep, _) = store.BeginOrResumeSweep(AtlasId, "opts-A", first);
        Assert.True(store.MergeTile(sweep, "L0:0,0", Tile("L0:0,0", 2).TileHash, Tile("L0:0,0", 2).Payload));
        var second = store.CommitSweep(sweep, "sweep", Fixed);

        Assert.Equal(before, store.Versions(AtlasId)[0]);
        Assert.Equal(beforeTiles, store.VersionTiles(AtlasId, first));
        Assert.Equal(new SweepRecord(sweep, AtlasId, "opts-A", first, "committed", second, 1), store.Sweep(sweep));
        Assert.Null(store.Sweep(sweep + 1000));
        var error = Assert.Throws<InvalidOperationException>(() => store.CommitSweep(sweep, "sweep", Fixed));
        Assert.Contains($"sweep {sweep} is already committed", error.Message, StringComparison.Ordinal);
        Assert.Equal(2, store.Versions(AtlasId).Count);
    }

    [Fact]
    public void The_first_merge_of_a_tile_wins_and_later_ones_change_nothing()
    {
        using var store = OpenWithAtlas();
        var (sweep, _) = store.BeginOrResumeSweep(AtlasId, "opts-A", null);
        var first = Tile("L0:0,0", 1);
        var other = Tile("L0:0,0", 2);

        Assert.True(store.MergeTile(sweep, "L0:0,0", first.TileHash, first.Payload));
        Assert.False(store.MergeTile(sweep, "L0:0,0", first.TileHash, first.Payload));
        Assert.False(store.MergeTile(sweep, "L0:0,0", other.TileHash, other.Payload));

        Assert.Equal(first.TileHash, store.BeginOrResumeSweep(AtlasId, "opts-A", null).Finished["L0:0,0"]);
        Assert.Equal(1, store.Sweep(sweep)!.FinishedTiles);

        // The losing payload was not stored either.
        var missing = Assert.Throws<InputException>(() => store.Tile(other.TileHash));
        Assert.Contains("missing", missing.Message, StringComparison.Ordinal);

        // After the commit, the sweep takes no tile at all.
        store.CommitSweep(sweep, "sweep", Fixed);
        var late = Tile("L0:1,0", 3);
        Assert.False(store.MergeTile(sweep, "L0:1,0", late.TileHash, late.Payload));
        Assert.Equal(["L0:0,0"], store.VersionTiles(AtlasId, 1).Keys);
        Assert.Equal(1, store.Sweep(sweep)!.FinishedTiles);
    }

    [Fact]
    public void Of_many_threads_merging_one_tile_exactly_one_succeeds()
    {
        using var store = OpenWithAtlas();
        var (sweep, _) = store.BeginOrResumeSweep(AtlasId, "opts-A", null);
        const int threads = 12;
        const int keys = 6;
        var results = new ConcurrentBag<(string Key, string Hash, bool Merged)>();
        using var start = new Barrier(threads);
        var errors = new ConcurrentBag<Exception>();
        var workers = Enumerable.Range(0, threads).Select(t => new Thread(() =>
        {
            try
            {
                start.SignalAndWait();
                for (var k = 0; k < keys; k++)
                {
                    // Every thread its own content for every key: the winner's hash must be the one kept.
                    var tile = Tile($"L0:{k},0", (100 * t) + k);
                    results.Add((tile.TileKey, tile.TileHash, store.MergeTile(sweep, tile.TileKey, tile.TileHash, tile.Payload)));
                }
            }
            catch (Exception e)
            {
                errors.Add(e);
            }
        })).ToList();
        workers.ForEach(w => w.Start());
        workers.ForEach(w => w.Join());

        Assert.Empty(errors);
        var finished = store.BeginOrResumeSweep(AtlasId, "opts-A", null).Finished;
        Assert.Equal(keys, finished.Count);
        foreach (var group in results.GroupBy(r => r.Key))
        {
            Assert.Equal(threads, group.Count());
            var winner = Assert.Single(group, r => r.Merged);
            Assert.Equal(winner.Hash, finished[group.Key]);
            Assert.Equal(winner.Hash, store.Tile(winner.Hash).TileHash);
        }
    }

    [Fact]
    public void Merging_into_an_unknown_sweep_or_with_a_wrong_hash_is_refused()
    {
        using var store = OpenWithAtlas();
        var (sweep, _) = store.BeginOrResumeSweep(AtlasId, "opts-A", null);
        var tile = Tile("L0:0,0", 1);

        var unknown = Assert.Throws<InvalidOperationException>(() => store.MergeTile(sweep + 99, "L0:0,0", tile.TileHash, tile.Payload));
        Assert.Contains($"no sweep {sweep + 99}", unknown.Message, StringComparison.Ordinal);
        var wrong = Assert.Throws<ArgumentException>(() => store.MergeTile(sweep, "L0:0,0", Tile("L0:0,0", 2).TileHash, tile.Payload));
        Assert.Contains("tile L0:0,0", wrong.Message, StringComparison.Ordinal);
        Assert.Contains("not the payload's SHA-256", wrong.Message, StringComparison.Ordinal);
        Assert.Equal(0, store.Sweep(sweep)!.FinishedTiles);
    }

    [Fact]
    public void Attempts_come_back_in_the_order_recorded_with_their_start_in_utc_to_the_microsecond()
    {
        using var store = OpenWithAtlas();
        var (sweep, _) = store.BeginOrResumeSweep(AtlasId, "opts-A", null);
        var (other, _) = store.BeginOrResumeSweep(AtlasId, "opts-B", null);

        // 1234567 ticks past the second, in a +02:00 zone: kept as 10:11:12.123456 UTC.
        var started = new DateTimeOffset(2026, 4, 12, 12, 11, 12, TimeSpan.FromHours(2)).AddTicks(1_234_567);
        TileAttempt[] recorded =
        [
            new(sweep, "L0:0,0", 1, "worker-a", started, 30.0, "timeout", "no answer before the tile deadline"),
            new(other, "L0:0,0", 1, "worker-b", started, 0.25, "merged", "abc"),
            new(sweep, "L0:0,0", 2, "worker-b", started.AddSeconds(31), 1.5, "merged", "ffee"),
            new(sweep, "L0:1,0", 1, "worker-c", started.AddSeconds(32), 0.0, "lost", "the worker was lost"),
            new(sweep, "L0:0,0", 3, "worker-c", started.AddSeconds(33), 2.0, "duplicate", "ffee"),
        ];
        foreach (var attempt in recorded)
        {
            store.RecordAttempt(attempt);
        }

        var back = store.Attempts(sweep);

        Assert.Equal(recorded.Where(a => a.SweepId == sweep).Select(AtlasStoreRules.Normalized), back);
        Assert.Equal(new DateTimeOffset(2026, 4, 12, 10, 11, 12, 123, 456, TimeSpan.Zero), back[0].Started);
        Assert.Equal(TimeSpan.Zero, back[0].Started.Offset);
        Assert.Equal([recorded[1] with { Started = back[0].Started }], store.Attempts(other));
        Assert.Empty(store.Attempts(sweep + 99));
    }

    [Fact]
    public void An_attempt_with_an_unknown_outcome_or_sweep_is_refused_and_not_kept()
    {
        using var store = OpenWithAtlas();
        var (sweep, _) = store.BeginOrResumeSweep(AtlasId, "opts-A", null);
        var good = new TileAttempt(sweep, "L0:0,0", 1, "w", DateTimeOffset.UnixEpoch, 1, "failed", "boom");

        var outcome = Assert.Throws<ArgumentException>(() => store.RecordAttempt(good with { Outcome = "exploded" }));
        Assert.Contains($"outcome 'exploded' is not one of {string.Join(", ", AtlasStoreRules.AttemptOutcomes)}", outcome.Message, StringComparison.Ordinal);
        Assert.Contains("merged", AtlasStoreRules.AttemptOutcomes);
        Assert.Throws<ArgumentException>(() => store.RecordAttempt(good with { Attempt = 0 }));
        Assert.Throws<ArgumentException>(() => store.RecordAttempt(good with { Seconds = double.NaN }));
        var unknown = Assert.Throws<InvalidOperationException>(() => store.RecordAttempt(good with { SweepId = sweep + 5 }));
        Assert.Contains($"no sweep {sweep + 5}", unknown.Message, StringComparison.Ordinal);

        Assert.Empty(store.Attempts(sweep));
        store.RecordAttempt(good);
        Assert.Single(store.Attempts(sweep));
    }

    [Fact]
    public void Kept_requests_are_listed_oldest_first_until_their_sweep_commits()
    {
        using var store = OpenWithAtlas();
        var (first, _) = store.BeginOrResumeSweep(AtlasId, "opts-A", null);
        var (second, _) = store.BeginOrResumeSweep(AtlasId, "opts-B", null);
        var (third, _) = store.BeginOrResumeSweep(AtlasId, "opts-C", null);
        store.SaveSweepRequest(second, AtlasId, [2]);
        store.SaveSweepRequest(first, AtlasId, [1]);
        store.SaveSweepRequest(first, AtlasId, [9, 9]);

        var before = store.UnfinishedSweepRequests();
        store.CommitSweep(first, "sweep", Fixed);
        var after = store.UnfinishedSweepRequests();

        Assert.Equal([first, second], before.Select(r => r.SweepId));
        Assert.Equal([1], before[0].Request);
        Assert.Equal(AtlasId, before[0].AtlasId);
        var left = Assert.Single(after);
        Assert.Equal((second, AtlasId), (left.SweepId, left.AtlasId));
        Assert.Equal([2], left.Request);
        Assert.DoesNotContain(third, after.Select(r => r.SweepId));
    }

    [Fact]
    public void A_request_for_an_unknown_sweep_or_another_atlas_is_refused()
    {
        using var store = OpenWithAtlas();
        var (sweep, _) = store.BeginOrResumeSweep(AtlasId, "opts-A", null);

        var unknown = Assert.Throws<InvalidOperationException>(() => store.SaveSweepRequest(sweep + 7, AtlasId, [1]));
        Assert.Contains($"no sweep {sweep + 7}", unknown.Message, StringComparison.Ordinal);
        var other = Assert.Throws<ArgumentException>(() => store.SaveSweepRequest(sweep, "a-other", [1]));
        Assert.Contains($"sweep {sweep} belongs to atlas '{AtlasId}', not 'a-other'", other.Message, StringComparison.Ordinal);
        Assert.Empty(store.UnfinishedSweepRequests());
    }

    [Fact]
    public void A_reopened_store_resumes_its_running_sweep_with_its_tiles_request_and_attempts()
    {
        long sweep;
        var tile = Tile("L0:0,0", 1);
        var attempt = new TileAttempt(0, "L0:0,0", 1, "worker-a", new DateTimeOffset(2026, 4, 12, 10, 0, 0, TimeSpan.Zero), 3.5, "merged", tile.TileHash);
        using (var store = OpenWithAtlas())
        {
            (sweep, _) = store.BeginOrResumeSweep(AtlasId, "opts-A", null);
            store.SaveSweepRequest(sweep, AtlasId, [5, 6, 7]);
            Assert.True(store.MergeTile(sweep, tile.TileKey, tile.TileHash, tile.Payload));
            store.RecordAttempt(attempt with { SweepId = sweep });
        }

        int version;
        using (var store = Open())
        {
            var request = Assert.Single(store.UnfinishedSweepRequests());
            Assert.Equal(sweep, request.SweepId);
            Assert.Equal([5, 6, 7], request.Request);
            Assert.Equal(new SweepRecord(sweep, AtlasId, "opts-A", null, "running", null, 1), store.Sweep(sweep));
            var (resumed, finished) = store.BeginOrResumeSweep(AtlasId, "opts-A", null);
            Assert.Equal(sweep, resumed);
            Assert.Equal(Map(tile), finished);
            Assert.Equal([attempt with { SweepId = sweep }], store.Attempts(sweep));
            Assert.Equal(tile.Payload, store.Tile(tile.TileHash).Payload);
            version = store.CommitSweep(sweep, "sweep", Fixed);
        }

        using (var store = Open())
        {
            Assert.Empty(store.UnfinishedSweepRequests());
            Assert.Equal(version, store.Sweep(sweep)!.Version);
            Assert.Equal("committed", store.Sweep(sweep)!.State);
            Assert.Equal(Map(tile), store.VersionTiles(AtlasId, version));

            // A new sweep with the same options starts afresh.
            Assert.NotEqual(sweep, store.BeginOrResumeSweep(AtlasId, "opts-A", version).SweepId);
        }
    }

    [Fact]
    public void A_corrupted_payload_is_a_checksum_error_naming_the_store_never_a_tile()
    {
        using var store = OpenWithAtlas();
        var tile = Tile("L0:0,0", 1);
        Sweep(store, "opts-A", null, [tile], Fixed);

        CorruptPayload(tile.TileHash);

        var error = Assert.Throws<InputException>(() => store.Tile(tile.TileHash));
        Assert.Contains($"tile {tile.TileHash[..12]}: checksum mismatch", error.Message, StringComparison.Ordinal);
        Assert.Contains($"the {Container} is damaged", error.Message, StringComparison.Ordinal);
        Assert.Equal(Map(tile), store.VersionTiles(AtlasId, 1));
    }

    [Fact]
    public void A_failing_description_leaves_no_new_version_and_the_sweep_running()
    {
        using var store = OpenWithAtlas();
        var (sweep, _) = store.BeginOrResumeSweep(AtlasId, "opts-A", null);
        var tile = Tile("L0:0,0", 1);
        store.MergeTile(sweep, tile.TileKey, tile.TileHash, tile.Payload);

        Assert.Throws<FormatException>(() => store.CommitSweep(sweep, "sweep", _ => throw new FormatException("describe failed")));
        Assert.Empty(store.Versions(AtlasId));
        Assert.Equal("running", store.Sweep(sweep)!.State);

        Assert.Equal(1, store.CommitSweep(sweep, "sweep", Fixed));
        var learned = Tile("learned:v2", 2);
        Assert.Throws<FormatException>(() => store.CommitDerived(AtlasId, 1, "learned", "x", [Added(learned)], ("model/{version}", [1]), _ => throw new FormatException("describe failed")));
        Assert.Single(store.Versions(AtlasId));
        Assert.Null(store.GetBlob("model/2"));
        Assert.Equal(2, store.CommitDerived(AtlasId, 1, "learned", "x", [Added(learned)], ("model/{version}", [1]), Fixed));
        Assert.Equal([1], store.GetBlob("model/2"));
    }

    [Fact]
    public void Commits_need_a_known_atlas_sweep_and_parent()
    {
        using var store = Open();
        var (sweep, _) = store.BeginOrResumeSweep("a-unknown", "opts-A", null);

        var atlas = Assert.Throws<InvalidOperationException>(() => store.CommitSweep(sweep, "sweep", Fixed));
        Assert.Contains("atlas 'a-unknown' is not in the store", atlas.Message, StringComparison.Ordinal);
        Assert.Equal("running", store.Sweep(sweep)!.State);
        var unknown = Assert.Throws<InvalidOperationException>(() => store.CommitSweep(sweep + 3, "sweep", Fixed));
        Assert.Contains($"no sweep {sweep + 3}", unknown.Message, StringComparison.Ordinal);
        store.EnsureAtlas("a-unknown", "family", "{}");
        var parent = Assert.Throws<InvalidOperationException>(() => store.CommitDerived("a-unknown", 1, "learned", "x", [], null, Fixed));
        Assert.Contains("atlas 'a-unknown' has no version 1", parent.Message, StringComparison.Ordinal);
        Assert.Equal(1, store.CommitSweep(sweep, "sweep", Fixed));
    }

    [Fact]
    public void An_atlas_keeps_its_family_and_blobs_keep_their_first_value()
    {
        using var store = OpenWithAtlas();
        store.EnsureAtlas(AtlasId, "family-hash-0000", "{\"other\": \"json, same hash\"}");
        var error = Assert.Throws<InputException>(() => store.EnsureAtlas(AtlasId, "another-family-hash", "{}"));
        Assert.Contains($"atlas '{AtlasId}': holds another family (content family-hash-), not this one (another-fami)", error.Message, StringComparison.Ordinal);
        store.EnsureAtlas("a-second", "h2", "{}");

        store.PutBlob("k", [1, 2, 3]);
        store.PutBlob("k", [4]);

        Assert.Equal(("family-hash-0000", "{\"family\": \"contract\"}"), store.Family(AtlasId));
        Assert.Null(store.Family("a-none"));
        Assert.Equal(["a-contract", "a-second"], store.Atlases());
        Assert.Equal([1, 2, 3], store.GetBlob("k"));
        Assert.Null(store.GetBlob("none"));
    }

    [Fact]
    public void Concurrent_commits_and_sweep_starts_on_one_atlas_stay_consistent()
    {
        using var store = OpenWithAtlas();

        // Ten sweeps with different options started and committed from ten threads: ten versions, numbered 1 to 10.
        var versions = new ConcurrentBag<int>();
        Parallel.For(0, 10, new ParallelOptions { MaxDegreeOfParallelism = 10 }, i =>
        {
            var (sweep, _) = store.BeginOrResumeSweep(AtlasId, $"opts-{i}", null);
            var tile = Tile("L0:0,0", i);
            store.MergeTile(sweep, tile.TileKey, tile.TileHash, tile.Payload);
            versions.Add(store.CommitSweep(sweep, "sweep", Fixed));
        });

        // Ten starts of one sweep: one sweep.
        var starts = new ConcurrentBag<long>();
        Parallel.For(0, 10, new ParallelOptions { MaxDegreeOfParallelism = 10 }, _ => starts.Add(store.BeginOrResumeSweep(AtlasId, "opts-same", 10).SweepId));

        Assert.Equal(Enumerable.Range(1, 10), versions.Order());
        Assert.Equal(Enumerable.Range(1, 10), store.Versions(AtlasId).Select(v => v.Version));
        Assert.Single(starts.Distinct());
    }

    /// <summary>The store with the contract's atlas recorded.</summary>
    protected ISweepLedger OpenWithAtlas()
    {
        var store = Open();
        store.EnsureAtlas(AtlasId, "family-hash-0000", "{\"family\": \"contract\"}");
        return store;
    }

    private static (string, string) Fixed(IReadOnlyDictionary<string, string> tiles) => ("content", $"{{\"tiles\":{tiles.Count}}}");

    /// <summary>Runs a sweep that merges the given tiles and commits it; returns the version.</summary>
    private static int Sweep(
        ISweepLedger store, string options, int? parent, StoredTile[] tiles, Func<IReadOnlyDictionary<string, string>, (string, string)> describe)
    {
        var (sweep, _) = store.BeginOrResumeSweep(AtlasId, options, parent);
        foreach (var tile in tiles)
        {
            Assert.True(store.MergeTile(sweep, tile.TileKey, tile.TileHash, tile.Payload));
        }

        return store.CommitSweep(sweep, "sweep", describe);
    }

    /// <summary>An encoded tile result with content of its own (a sample at <paramref name="variant"/>).</summary>
    protected static StoredTile Tile(string key, int variant)
    {
        var result = new TileResult { FamilyHash = "family-hash-0000", TileKey = key };
        result.Samples.Add(new Sample { Label = variant % 4, Kind = SampleKind.Uniform, Point = { variant, -0.5 } });
        var payload = result.ToByteArray();
        return new StoredTile(key, AtlasStoreRules.HashOf(payload), payload);
    }

    private static (string TileKey, string TileHash, byte[] Payload) Added(StoredTile tile) => (tile.TileKey, tile.TileHash, tile.Payload);

    private static Dictionary<string, string> Map(params StoredTile[] tiles) => tiles.ToDictionary(t => t.TileKey, t => t.TileHash, StringComparer.Ordinal);
}
