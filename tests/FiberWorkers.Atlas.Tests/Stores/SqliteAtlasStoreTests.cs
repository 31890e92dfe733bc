using System.Text;
using FiberWorkers.Algebra.Families;
using FiberWorkers.Atlas.Stores;
using FiberWorkers.Atlas.Sweeps;
using FiberWorkers.Atlas.Tests.Support;
using FiberWorkers.Testing;
using Google.Protobuf;

namespace FiberWorkers.Atlas.Tests.Stores;

/// <summary>The SQLite atlas store: immutable numbered versions, resumed sweeps, checksums, and files that are not atlases.</summary>
public sealed class SqliteAtlasStoreTests
{
    private static readonly FamilyDefinition Cubic = TestFamilies.Example("cubic");

    private static SweepOptions Options(int tiles = 2, int lines = 2) =>
        new() { Divisions = [tiles, tiles], LinesPerTile = lines, Seed = 17, MaxDegreeOfParallelism = 1 };

    [Fact]
    public void Versions_are_numbered_from_one_and_a_later_sweep_leaves_earlier_versions_untouched()
    {
        using var atlas = new TempAtlas();
        using var store = atlas.Open();
        var runner = new SweepRunner(store);
        var first = runner.Run(Cubic, Options(lines: 2));
        var firstInfo = store.Versions(first.AtlasId).Single();
        var firstTiles = store.VersionTiles(first.AtlasId, 1);
        var firstBytes = firstTiles.ToDictionary(t => t.Key, t => store.Tile(t.Value).Payload);

        var second = runner.Run(Cubic, Options(lines: 3));

        Assert.Equal(1, first.AtlasVersion);
        Assert.Equal(2, second.AtlasVersion);
        var versions = store.Versions(first.AtlasId);
        Assert.Equal([1, 2], versions.Select(v => v.Version));
        Assert.Null(versions[0].Parent);
        Assert.Equal(1, versions[1].Parent);
        Assert.Equal(Options(lines: 3).CanonicalText, versions[1].Options);
        Assert.NotEqual(first.ContentHash, second.ContentHash);

        // Version 1 is exactly as it was: its record, its tile map, and every tile's bytes.
        Assert.Equal(firstInfo, versions[0]);
        Assert.Equal(firstTiles.OrderBy(t => t.Key), store.VersionTiles(first.AtlasId, 1).OrderBy(t => t.Key));
        foreach (var (key, hash) in store.VersionTiles(first.AtlasId, 1))
        {
            Assert.Equal(firstBytes[key], store.Tile(hash).Payload);
        }

        var snapshot = AtlasSnapshot.Load(store, atlas.Path, version: 1);
        Assert.Equal(first.Samples, snapshot.Samples.Count);
        Assert.Equal(first.ContentHash, AtlasContent.Hash(Cubic.ContentHash, versions[0].Options, firstTiles));
    }

    [Fact]
    public void The_content_hash_depends_on_the_content_not_on_the_history()
    {
        // Sweeping with options A, then B, then A again: the third version holds the same content as the first.
        using var atlas = new TempAtlas();
        using var store = atlas.Open();
        var runner = new SweepRunner(store);
        var first = runner.Run(Cubic, Options(lines: 2));
        runner.Run(Cubic, Options(lines: 3));
        var third = runner.Run(Cubic, Options(lines: 2));

        Assert.Equal(3, third.AtlasVersion);
        Assert.Equal(2, store.Versions(third.AtlasId)[2].Parent);
        Assert.Equal(first.ContentHash, third.ContentHash);
        Assert.Equal(store.VersionTiles(first.AtlasId, 1).OrderBy(t => t.Key), store.VersionTiles(first.AtlasId, 3).OrderBy(t => t.Key));
    }

    [Fact]
    public void A_sweep_with_another_grid_commits_only_its_own_tiles()
    {
        // Tile keys name different regions under different divisions (L0:2,2 exists in a 3x3 grid, not in 2x2), and
        // every tile records the options that made it: a version must not mix tiles of two option sets.
        using var atlas = new TempAtlas();
        using var store = atlas.Open();
        var runner = new SweepRunner(store);
        runner.Run(Cubic, Options(tiles: 3));
        var second = runner.Run(Cubic, Options(tiles: 2));

        Assert.Equal(4, second.Tiles);
        var snapshot = AtlasSnapshot.Load(store, atlas.Path, version: 2);
        Assert.Equal(4, snapshot.Tiles.Count);
        Assert.All(snapshot.Tiles, t => Assert.Equal(TileComputer.OptionsHash(Options(tiles: 2)), t.OptionsHash));
        Assert.Equal(1, snapshot.Version.Parent);
    }

    [Fact]
    public void Derived_tiles_are_shared_with_later_sweeps_whatever_their_options()
    {
        // A derived version (here: one extra tile of our own, as learned samples are stored) sits between two sweeps;
        // the second sweep, with another grid, keeps the derived tile and drops the first grid.
        using var atlas = new TempAtlas();
        using var store = atlas.Open();
        var runner = new SweepRunner(store);
        var first = runner.Run(Cubic, Options(tiles: 3));
        var extra = new Contracts.V1.TileResult { FamilyHash = Cubic.ContentHash, TileKey = "learned:v2" };
        extra.Samples.Add(new Contracts.V1.Sample { Label = 3, Kind = Contracts.V1.SampleKind.Resolved, Point = { -2.0, 0.5 } });
        var payload = extra.ToByteArray();
        var derived = store.CommitDerived(first.AtlasId, 1, "learned", "learned:1 resolved samples", [("learned:v2", SqliteAtlasStore.HashOf(payload), payload)], null, _ => ("derived", "{}"));
        var sameOptions = runner.Run(Cubic, Options(tiles: 3));
        var otherGrid = runner.Run(Cubic, Options(tiles: 2));

        Assert.Equal(2, derived);
        Assert.Equal(2, store.Versions(first.AtlasId)[2].Parent);
        Assert.Equal(10, sameOptions.Tiles);
        Assert.Equal(5, otherGrid.Tiles);
        Assert.Contains("learned:v2", store.VersionTiles(first.AtlasId, otherGrid.AtlasVersion).Keys);
        Assert.DoesNotContain("L0:2,2", store.VersionTiles(first.AtlasId, otherGrid.AtlasVersion).Keys);
    }

    [Fact]
    public void A_resumed_sweep_reuses_the_finished_tiles_and_ends_with_the_uninterrupted_content()
    {
        using var atlas = new TempAtlas();
        using var reference = new TempAtlas("reference");
        var options = Options(tiles: 3);
        using (var store = atlas.Open())
        {
            using var cancel = new CancellationTokenSource();
            var stopper = new StopAfter(3, cancel);
            Assert.ThrowsAny<OperationCanceledException>(() => new SweepRunner(store).Run(Cubic, options, stopper, cancel.Token));
            Assert.Empty(store.Versions(SweepRunner.AtlasIdOf(Cubic)));
        }

        Assert.Equal(3, RawSqlite.Scalar(atlas.Path, "SELECT COUNT(*) FROM sweep_tiles", readOnly: true));
        SweepSummary resumed;
        using (var store = atlas.Open())
        {
            resumed = new SweepRunner(store).Run(Cubic, options);
        }

        using var fresh = reference.Open();
        var uninterrupted = new SweepRunner(fresh).Run(Cubic, options);

        Assert.Equal(1, resumed.AtlasVersion);
        Assert.Equal(9, resumed.Tiles);
        Assert.Equal(6, resumed.TilesComputed);
        Assert.Equal(9, uninterrupted.TilesComputed);
        Assert.Equal(uninterrupted.ContentHash, resumed.ContentHash);
        Assert.Equal(uninterrupted.Labels, resumed.Labels);
    }

    [Fact]
    public void A_corrupted_tile_payload_is_reported_as_a_checksum_mismatch_never_read_as_content()
    {
        using var atlas = new TempAtlas();
        string atlasId;
        using (var store = atlas.Open())
        {
            atlasId = new SweepRunner(store).Run(Cubic, Options()).AtlasId;
        }

        var hash = Flip(atlas.Path);

        using (var store = atlas.Open())
        {
            var direct = Assert.Throws<InputException>(() => store.Tile(hash));
            Assert.Contains("checksum mismatch", direct.Message, StringComparison.Ordinal);
            var load = Assert.Throws<InputException>(() => AtlasSnapshot.Load(store, atlas.Path));
            Assert.Contains("checksum mismatch", load.Message, StringComparison.Ordinal);
            Assert.Contains("damaged", load.Message, StringComparison.Ordinal);
            Assert.Throws<InputException>(() => new SweepRunner(store).Summarize(atlasId, 1));
        }
    }

    [Fact]
    public void A_resumed_sweep_refuses_a_corrupted_finished_tile()
    {
        using var atlas = new TempAtlas();
        var options = Options(tiles: 3);
        using (var store = atlas.Open())
        {
            using var cancel = new CancellationTokenSource();
            Assert.ThrowsAny<OperationCanceledException>(() => new SweepRunner(store).Run(Cubic, options, new StopAfter(2, cancel), cancel.Token));
        }

        Flip(atlas.Path);

        using (var store = atlas.Open())
        {
            var error = Assert.Throws<InputException>(() => new SweepRunner(store).Run(Cubic, options));
            Assert.Contains("checksum mismatch", error.Message, StringComparison.Ordinal);
            Assert.Empty(store.Versions(SweepRunner.AtlasIdOf(Cubic)));
        }
    }

    [Fact]
    public void A_text_file_is_refused_as_not_an_atlas_and_left_as_it_was()
    {
        using var atlas = new TempAtlas();
        var text = Encoding.UTF8.GetBytes("P2,P3,label\n0.1,0.2,4\n".PadRight(600, '#'));
        File.WriteAllBytes(atlas.Path, text);

        var error = Assert.Throws<InputException>(() => SqliteAtlasStore.Open(atlas.Path));

        Assert.Contains("not an atlas file", error.Message, StringComparison.Ordinal);
        Assert.Contains(Path.GetFileName(atlas.Path), error.Message, StringComparison.Ordinal);
        Assert.Equal(text, File.ReadAllBytes(atlas.Path));
    }

    [Fact]
    public void A_database_of_another_application_is_refused_and_left_as_it_was()
    {
        using var atlas = new TempAtlas();
        RawSqlite.Execute(atlas.Path, "CREATE TABLE readings (t REAL, value REAL)");
        RawSqlite.Execute(atlas.Path, "INSERT INTO readings VALUES (1.5, 2.5)");
        var before = File.ReadAllBytes(atlas.Path);

        var error = Assert.Throws<InputException>(() => SqliteAtlasStore.Open(atlas.Path));

        Assert.Contains("not an atlas file (a SQLite database of another application)", error.Message, StringComparison.Ordinal);

        // Refusing must not convert the other application's file (for example to WAL mode) on the way.
        Assert.Equal(before, File.ReadAllBytes(atlas.Path));
        Assert.False(File.Exists(atlas.Path + "-wal"), "a WAL file was created next to the other application's database");
    }

    [Fact]
    public void An_atlas_of_a_newer_schema_is_refused_with_both_versions_named()
    {
        using var atlas = new TempAtlas();
        using (atlas.Open())
        {
        }

        RawSqlite.Execute(atlas.Path, $"PRAGMA user_version = {SqliteAtlasStore.SchemaVersion + 1}");

        var error = Assert.Throws<InputException>(() => SqliteAtlasStore.Open(atlas.Path));
        Assert.Contains($"schema version {SqliteAtlasStore.SchemaVersion + 1} is newer than this build reads ({SqliteAtlasStore.SchemaVersion})", error.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void Opening_a_missing_file_without_create_is_an_input_error_and_creates_nothing()
    {
        using var atlas = new TempAtlas();
        var error = Assert.Throws<InputException>(() => SqliteAtlasStore.Open(atlas.Path, create: false));
        Assert.Contains("no such atlas file", error.Message, StringComparison.Ordinal);
        Assert.False(File.Exists(atlas.Path));
    }

    [Fact]
    public void A_reopened_atlas_keeps_its_schema_and_versions()
    {
        using var atlas = new TempAtlas();
        string hash;
        using (var store = atlas.Open())
        {
            hash = new SweepRunner(store).Run(Cubic, Options()).ContentHash;
        }

        using (var store = SqliteAtlasStore.Open(atlas.Path, create: false))
        {
            Assert.Equal(hash, store.Versions(SweepRunner.AtlasIdOf(Cubic)).Single().ContentHash);
        }

        Assert.Equal(SqliteAtlasStore.SchemaVersion, RawSqlite.Scalar(atlas.Path, "PRAGMA user_version", readOnly: true));
    }

    [Fact]
    public void A_committed_sweep_cannot_be_committed_again_and_blobs_keep_their_first_value()
    {
        using var atlas = new TempAtlas();
        using var store = atlas.Open();
        store.EnsureAtlas("a1", Cubic.ContentHash, JsonFormatter.Default.Format(Cubic.Message));
        var (sweep, finished) = store.BeginOrResumeSweep("a1", "options", null);
        Assert.Empty(finished);
        var version = store.CommitSweep(sweep, "sweep", tiles => ("hash", "{}"));

        Assert.Equal(1, version);
        Assert.Throws<InvalidOperationException>(() => store.CommitSweep(sweep, "sweep", tiles => ("other", "{}")));
        Assert.Equal("hash", store.Versions("a1").Single().ContentHash);
        store.PutBlob("k", [1, 2, 3]);
        store.PutBlob("k", [4]);
        Assert.Equal([1, 2, 3], store.GetBlob("k"));
    }

    /// <summary>Flips one byte in the middle of a stored tile payload (raw SQL); returns that tile's hash.</summary>
    private static string Flip(string path)
    {
        var hash = RawSqlite.Text(path, "SELECT tile_hash FROM tiles ORDER BY tile_hash LIMIT 1");
        var payload = RawSqlite.Blob(path, "SELECT payload FROM tiles WHERE tile_hash = $h", ("$h", hash));
        payload[payload.Length / 2] ^= 0x01;
        RawSqlite.Execute(path, "UPDATE tiles SET payload = $p WHERE tile_hash = $h", ("$p", payload), ("$h", hash));
        return hash;
    }

    /// <summary>Cancels the sweep once <c>count</c> tiles are stored (reported synchronously, inside the runner).</summary>
    private sealed class StopAfter(int count, CancellationTokenSource cancel) : IProgress<SweepProgress>
    {
        public void Report(SweepProgress value)
        {
            if (value.Stage.StartsWith("level", StringComparison.Ordinal) && value.TilesDone >= count)
            {
                cancel.Cancel();
            }
        }
    }
}
