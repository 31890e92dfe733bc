using FiberWorkers.Algebra.Families;
using FiberWorkers.Atlas.Stores;
using FiberWorkers.Atlas.Tests.Support;
using Google.Protobuf;

namespace FiberWorkers.Atlas.Tests.Stores;

/// <summary>
/// Atlas files of schema version 1 (as written before the sweep ledger) open, are upgraded in place in one transaction,
/// and keep every version, tile, sweep and blob; a failed upgrade leaves the file at version 1.
/// </summary>
public sealed class SqliteMigrationTests
{
    /// <summary>Schema version 1 exactly as the store created it (commit a9860c7, unchanged since).</summary>
    private const string SchemaV1 = """
        CREATE TABLE atlases (atlas_id TEXT PRIMARY KEY, family_hash TEXT NOT NULL, family_json TEXT NOT NULL);
        CREATE TABLE tiles (tile_hash TEXT PRIMARY KEY, payload BLOB NOT NULL);
        CREATE TABLE sweeps (
            sweep_id INTEGER PRIMARY KEY AUTOINCREMENT, atlas_id TEXT NOT NULL, options_text TEXT NOT NULL,
            parent INTEGER, state TEXT NOT NULL, created TEXT NOT NULL);
        CREATE TABLE sweep_tiles (sweep_id INTEGER NOT NULL, tile_key TEXT NOT NULL, tile_hash TEXT NOT NULL,
            PRIMARY KEY (sweep_id, tile_key));
        CREATE TABLE versions (
            atlas_id TEXT NOT NULL, version INTEGER NOT NULL, parent INTEGER, kind TEXT NOT NULL, created TEXT NOT NULL,
            options_text TEXT NOT NULL, content_hash TEXT NOT NULL, summary_json TEXT NOT NULL, PRIMARY KEY (atlas_id, version));
        CREATE TABLE version_tiles (atlas_id TEXT NOT NULL, version INTEGER NOT NULL, tile_key TEXT NOT NULL, tile_hash TEXT NOT NULL,
            PRIMARY KEY (atlas_id, version, tile_key));
        CREATE TABLE blobs (blob_key TEXT PRIMARY KEY, payload BLOB NOT NULL);
        PRAGMA application_id = 1180126001;
        PRAGMA user_version = 1;
        """;

    private const string Schema = "SELECT group_concat(line, char(10)) FROM (SELECT type || ' ' || name || ': ' || coalesce(sql, '-') AS line FROM sqlite_master ORDER BY type, name)";

    [Fact]
    public void A_version_1_file_is_upgraded_in_place_and_keeps_its_versions_tiles_sweeps_and_blobs()
    {
        using var atlas = new TempAtlas("v1");
        var v1 = WriteVersion1(atlas.Path);

        using (var store = SqliteAtlasStore.Open(atlas.Path, create: false))
        {
            // Versions and their tiles, as written.
            var versions = store.Versions("a1");
            Assert.Equal([1, 2], versions.Select(v => v.Version));
            Assert.Equal([null, 1], versions.Select(v => v.Parent));
            Assert.Equal(["hash-1", "hash-2"], versions.Select(v => v.ContentHash));
            Assert.Equal("{\"tiles\":2}", versions[1].Summary);
            Assert.Equal(new DateTimeOffset(2026, 1, 2, 3, 4, 5, TimeSpan.Zero), versions[0].Created);
            Assert.Equal(v1.Tiles.OrderBy(t => t.Key), store.VersionTiles("a1", 2).OrderBy(t => t.Key));
            foreach (var (key, hash) in v1.Tiles)
            {
                Assert.Equal(v1.Payloads[key], store.Tile(hash).Payload);
            }

            // Committed sweeps learn the version they made (one version matches each); the running one resumes.
            Assert.Equal(new SweepRecord(1, "a1", "opts-A", null, "committed", 1, 2), store.Sweep(1));
            Assert.Equal(new SweepRecord(2, "a1", "opts-B", 1, "committed", 2, 1), store.Sweep(2));
            Assert.Equal(new SweepRecord(3, "a1", "opts-C", 2, "running", null, 1), store.Sweep(3));
            Assert.Empty(store.UnfinishedSweepRequests());
            Assert.Equal([9, 8, 7], store.GetBlob("start-fiber/x"));

            var (resumed, finished) = store.BeginOrResumeSweep("a1", "opts-C", 2);
            Assert.Equal(3, resumed);
            Assert.Equal(["L0:0,0"], finished.Keys);
            Assert.False(store.MergeTile(3, "L0:0,0", v1.Tiles["L0:1,0"], v1.Payloads["L0:1,0"]));
            Assert.True(store.MergeTile(3, "L0:1,0", v1.Tiles["L0:1,0"], v1.Payloads["L0:1,0"]));
            var version = store.CommitSweep(3, "sweep", tiles => ("hash-3", $"{{\"tiles\":{tiles.Count}}}"));
            Assert.Equal(3, version);
            Assert.Equal(3, store.Sweep(3)!.Version);
        }

        Assert.Equal(SqliteAtlasStore.SchemaVersion, RawSqlite.Scalar(atlas.Path, "PRAGMA user_version", readOnly: true));

        // The upgraded file has exactly the schema of a file created by this build.
        using var fresh = new TempAtlas("fresh");
        using (fresh.Open())
        {
        }

        Assert.Equal(RawSqlite.Text(fresh.Path, Schema), RawSqlite.Text(atlas.Path, Schema));
        using (var reopened = SqliteAtlasStore.Open(atlas.Path, create: false))
        {
            Assert.Equal([1, 2, 3], reopened.Versions("a1").Select(v => v.Version));
        }
    }

    [Fact]
    public void A_version_1_sweep_whose_version_cannot_be_told_apart_keeps_no_version()
    {
        // Two committed sweeps with the same options and parent: either could have made either version.
        using var atlas = new TempAtlas("v1");
        RawSqlite.Execute(atlas.Path, SchemaV1);
        RawSqlite.Execute(atlas.Path, """
            INSERT INTO atlases VALUES ('a1', 'family-hash', '{}');
            INSERT INTO sweeps VALUES (1, 'a1', 'same', NULL, 'committed', '2026-01-02T03:04:05.0000000+00:00');
            INSERT INTO sweeps VALUES (2, 'a1', 'same', NULL, 'committed', '2026-01-02T03:04:06.0000000+00:00');
            INSERT INTO versions VALUES ('a1', 1, NULL, 'sweep', '2026-01-02T03:04:05.0000000+00:00', 'same', 'h1', '{}');
            INSERT INTO versions VALUES ('a1', 2, NULL, 'sweep', '2026-01-02T03:04:06.0000000+00:00', 'same', 'h2', '{}');
            """);

        using var store = SqliteAtlasStore.Open(atlas.Path, create: false);

        Assert.Equal("committed", store.Sweep(1)!.State);
        Assert.Null(store.Sweep(1)!.Version);
        Assert.Null(store.Sweep(2)!.Version);
        Assert.Equal(2, store.Versions("a1").Count);
    }

    [Fact]
    public void A_failed_upgrade_leaves_the_file_at_version_1_with_its_old_schema()
    {
        // A version 1 file that somehow holds a table the upgrade creates: the upgrade fails half-way through its
        // statements, and everything it did before is rolled back.
        using var atlas = new TempAtlas("v1");
        WriteVersion1(atlas.Path);
        RawSqlite.Execute(atlas.Path, "CREATE TABLE tile_attempts (anything TEXT)");
        var before = RawSqlite.Text(atlas.Path, Schema);

        var error = Assert.Throws<InputException>(() => SqliteAtlasStore.Open(atlas.Path, create: false));

        Assert.Contains("v1.db: upgrading the atlas schema from version 1 to 2 failed", error.Message, StringComparison.Ordinal);
        Assert.Contains("tile_attempts already exists", error.Message, StringComparison.Ordinal);
        Assert.Contains("the file is unchanged", error.Message, StringComparison.Ordinal);
        Assert.Equal(1, RawSqlite.Scalar(atlas.Path, "PRAGMA user_version", readOnly: true));
        Assert.Equal(before, RawSqlite.Text(atlas.Path, Schema));
        Assert.Equal(0, RawSqlite.Scalar(atlas.Path, "SELECT COUNT(*) FROM pragma_table_info('sweeps') WHERE name = 'version'", readOnly: true));
    }

    /// <summary>
    /// A version 1 file: two committed sweeps and their versions (the second sharing one tile with the first), a
    /// running sweep with one tile, and a blob.
    /// </summary>
    private static (Dictionary<string, string> Tiles, Dictionary<string, byte[]> Payloads) WriteVersion1(string path)
    {
        RawSqlite.Execute(path, SchemaV1);
        var payloads = new Dictionary<string, byte[]>(StringComparer.Ordinal);
        var tiles = new Dictionary<string, string>(StringComparer.Ordinal);
        foreach (var key in new[] { "L0:0,0", "L0:1,0" })
        {
            var tile = new Contracts.V1.TileResult { FamilyHash = "family-hash", TileKey = key };
            tile.Samples.Add(new Contracts.V1.Sample { Label = 1, Kind = Contracts.V1.SampleKind.Uniform, Point = { key.Length, 0.5 } });
            payloads[key] = tile.ToByteArray();
            tiles[key] = AtlasStoreRules.HashOf(payloads[key]);
            RawSqlite.Execute(path, "INSERT INTO tiles VALUES ($h, $p)", ("$h", tiles[key]), ("$p", payloads[key]));
        }

        RawSqlite.Execute(path, """
            INSERT INTO atlases VALUES ('a1', 'family-hash', '{"family": "test"}');
            INSERT INTO sweeps VALUES (1, 'a1', 'opts-A', NULL, 'committed', '2026-01-02T03:04:05.0000000+00:00');
            INSERT INTO sweeps VALUES (2, 'a1', 'opts-B', 1, 'committed', '2026-01-02T03:05:05.0000000+00:00');
            INSERT INTO sweeps VALUES (3, 'a1', 'opts-C', 2, 'running', '2026-01-02T03:06:05.0000000+00:00');
            INSERT INTO versions VALUES ('a1', 1, NULL, 'sweep', '2026-01-02T03:04:05.0000000+00:00', 'opts-A', 'hash-1', '{"tiles":2}');
            INSERT INTO versions VALUES ('a1', 2, 1, 'sweep', '2026-01-02T03:05:05.0000000+00:00', 'opts-B', 'hash-2', '{"tiles":2}');
            INSERT INTO blobs VALUES ('start-fiber/x', x'090807');
            """);
        foreach (var (sweep, key) in new[] { (1, "L0:0,0"), (1, "L0:1,0"), (2, "L0:1,0"), (3, "L0:0,0") })
        {
            RawSqlite.Execute(path, "INSERT INTO sweep_tiles VALUES ($s, $k, $h)", ("$s", sweep), ("$k", key), ("$h", tiles[key]));
        }

        foreach (var (version, key) in new[] { (1, "L0:0,0"), (1, "L0:1,0"), (2, "L0:0,0"), (2, "L0:1,0") })
        {
            RawSqlite.Execute(path, "INSERT INTO version_tiles VALUES ('a1', $v, $k, $h)", ("$v", version), ("$k", key), ("$h", tiles[key]));
        }

        return (tiles, payloads);
    }
}
