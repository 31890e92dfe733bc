using System.Globalization;
using System.Security.Cryptography;
using FiberWorkers.Algebra.Families;
using Microsoft.Data.Sqlite;

namespace FiberWorkers.Atlas.Stores;

/// <summary>
/// The embedded atlas store: one SQLite file in WAL mode, schema versioned and migrated on open. Every write is a
/// transaction, so killing the process at any moment leaves every committed version intact and a sweep resumable.
/// Tiles are content-addressed (SHA-256 of the encoded result) and checked when read. One connection, guarded by a
/// lock: safe for the sweep's single writer and concurrent readers in the same process.
/// </summary>
public sealed class SqliteAtlasStore : IAtlasStore
{
    /// <summary>Marks the file as ours (PRAGMA application_id): "FWK1".</summary>
    private const int ApplicationId = 0x46574B31;

    /// <summary>The schema version this build writes.</summary>
    public const int SchemaVersion = 1;

    private static readonly string[] Migrations =
    [
        // 1: atlases, content-addressed tiles, sweeps, versions, blobs.
        """
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
        """,
    ];

    private readonly SqliteConnection _connection;
    private readonly Lock _gate = new();
    private readonly string _source;
    private readonly TimeProvider _time;

    private SqliteAtlasStore(SqliteConnection connection, string source, TimeProvider time)
    {
        _connection = connection;
        _source = source;
        _time = time;
    }

    /// <summary>Opens (creating when absent) an atlas file; a file that is not an atlas is an input error.</summary>
    public static SqliteAtlasStore Open(string path, TimeProvider? time = null, bool create = true)
    {
        ArgumentNullException.ThrowIfNull(path);
        var source = Path.GetFileName(path);
        if (!create && !File.Exists(path))
        {
            throw new InputException(path, string.Empty, "no such atlas file");
        }

        var builder = new SqliteConnectionStringBuilder { DataSource = path, Pooling = false, Mode = create ? SqliteOpenMode.ReadWriteCreate : SqliteOpenMode.ReadWrite };
        var connection = new SqliteConnection(builder.ToString());
        try
        {
            connection.Open();
            var store = new SqliteAtlasStore(connection, source, time ?? TimeProvider.System);
            store.Prepare();
            return store;
        }
        catch (SqliteException e)
        {
            connection.Dispose();
            throw new InputException(source, string.Empty, $"not an atlas file ({e.Message.TrimEnd('.')})");
        }
        catch
        {
            connection.Dispose();
            throw;
        }
    }

    /// <inheritdoc />
    public void EnsureAtlas(string atlasId, string familyHash, string familyJson)
    {
        lock (_gate)
        {
            var existing = FamilyUnlocked(atlasId);
            if (existing is { } known)
            {
                if (known.FamilyHash != familyHash)
                {
                    throw new InputException(
                        _source, $"atlas '{atlasId}'", $"holds another family (content {known.FamilyHash[..12]}), not this one ({familyHash[..12]})");
                }

                return;
            }

            Execute("INSERT INTO atlases (atlas_id, family_hash, family_json) VALUES ($a, $h, $j)", ("$a", atlasId), ("$h", familyHash), ("$j", familyJson));
        }
    }

    /// <inheritdoc />
    public (string FamilyHash, string FamilyJson)? Family(string atlasId)
    {
        lock (_gate)
        {
            return FamilyUnlocked(atlasId);
        }
    }

    /// <inheritdoc />
    public IReadOnlyList<string> Atlases()
    {
        lock (_gate)
        {
            return Query("SELECT atlas_id FROM atlases ORDER BY atlas_id", r => r.GetString(0));
        }
    }

    /// <inheritdoc />
    public byte[]? GetBlob(string key)
    {
        lock (_gate)
        {
            return Query("SELECT payload FROM blobs WHERE blob_key = $k", r => (byte[])r[0], ("$k", key)).FirstOrDefault();
        }
    }

    /// <inheritdoc />
    public void PutBlob(string key, byte[] payload)
    {
        lock (_gate)
        {
            Execute("INSERT OR IGNORE INTO blobs (blob_key, payload) VALUES ($k, $p)", ("$k", key), ("$p", payload));
        }
    }

    /// <inheritdoc />
    public (long SweepId, IReadOnlyDictionary<string, string> Finished) BeginOrResumeSweep(string atlasId, string optionsText, int? parent)
    {
        lock (_gate)
        {
            var running = Query(
                "SELECT sweep_id FROM sweeps WHERE atlas_id = $a AND options_text = $o AND state = 'running' ORDER BY sweep_id DESC LIMIT 1",
                r => r.GetInt64(0),
                ("$a", atlasId),
                ("$o", optionsText));
            if (running.Count > 0)
            {
                var finished = Query(
                    "SELECT tile_key, tile_hash FROM sweep_tiles WHERE sweep_id = $s", r => (r.GetString(0), r.GetString(1)), ("$s", running[0]));
                return (running[0], finished.ToDictionary(f => f.Item1, f => f.Item2, StringComparer.Ordinal));
            }

            Execute(
                "INSERT INTO sweeps (atlas_id, options_text, parent, state, created) VALUES ($a, $o, $p, 'running', $c)",
                ("$a", atlasId),
                ("$o", optionsText),
                ("$p", parent),
                ("$c", Now()));
            var id = Query("SELECT last_insert_rowid()", r => r.GetInt64(0))[0];
            return (id, new Dictionary<string, string>(StringComparer.Ordinal));
        }
    }

    /// <inheritdoc />
    public void PutTile(long sweepId, string tileKey, string tileHash, byte[] payload)
    {
        lock (_gate)
        {
            using var transaction = _connection.BeginTransaction();
            Execute("INSERT OR IGNORE INTO tiles (tile_hash, payload) VALUES ($h, $p)", transaction, ("$h", tileHash), ("$p", payload));
            Execute(
                "INSERT OR REPLACE INTO sweep_tiles (sweep_id, tile_key, tile_hash) VALUES ($s, $k, $h)",
                transaction,
                ("$s", sweepId),
                ("$k", tileKey),
                ("$h", tileHash));
            transaction.Commit();
        }
    }

    /// <inheritdoc />
    public int CommitSweep(long sweepId, string kind, Func<IReadOnlyDictionary<string, string>, (string ContentHash, string Summary)> describe)
    {
        ArgumentNullException.ThrowIfNull(describe);
        lock (_gate)
        {
            var sweep = Query(
                "SELECT atlas_id, options_text, parent, state FROM sweeps WHERE sweep_id = $s",
                r => (Atlas: r.GetString(0), Options: r.GetString(1), Parent: r.IsDBNull(2) ? (int?)null : r.GetInt32(2), State: r.GetString(3)),
                ("$s", sweepId)).Single();
            if (sweep.State != "running")
            {
                throw new InvalidOperationException($"sweep {sweepId} is already committed");
            }

            // Grid tiles (keys L<level>:...) are shared with the parent only when its grid came from the same sweep
            // options: under other options a key names another region (other divisions) or other content (every tile
            // records its options), and the version's content hash is taken under this sweep's options. Tiles of
            // derived versions (learned samples) are shared either way.
            var tiles = new SortedDictionary<string, string>(StringComparer.Ordinal);
            if (sweep.Parent is { } parent)
            {
                var sameGrid = SweepOptionsOfUnlocked(sweep.Atlas, parent) == sweep.Options;
                foreach (var (key, hash) in VersionTilesUnlocked(sweep.Atlas, parent))
                {
                    if (sameGrid || !IsGridKey(key))
                    {
                        tiles[key] = hash;
                    }
                }
            }

            foreach (var (key, hash) in Query("SELECT tile_key, tile_hash FROM sweep_tiles WHERE sweep_id = $s", r => (r.GetString(0), r.GetString(1)), ("$s", sweepId)))
            {
                tiles[key] = hash;
            }

            var (contentHash, summary) = describe(tiles);
            using var transaction = _connection.BeginTransaction();
            var version = Query("SELECT COALESCE(MAX(version), 0) + 1 FROM versions WHERE atlas_id = $a", r => r.GetInt32(0), transaction, ("$a", sweep.Atlas))[0];
            Execute(
                "INSERT INTO versions (atlas_id, version, parent, kind, created, options_text, content_hash, summary_json) VALUES ($a, $v, $p, $k, $c, $o, $h, $j)",
                transaction,
                ("$a", sweep.Atlas),
                ("$v", version),
                ("$p", sweep.Parent),
                ("$k", kind),
                ("$c", Now()),
                ("$o", sweep.Options),
                ("$h", contentHash),
                ("$j", summary));
            foreach (var (key, hash) in tiles)
            {
                Execute(
                    "INSERT INTO version_tiles (atlas_id, version, tile_key, tile_hash) VALUES ($a, $v, $k, $h)",
                    transaction,
                    ("$a", sweep.Atlas),
                    ("$v", version),
                    ("$k", key),
                    ("$h", hash));
            }

            Execute("UPDATE sweeps SET state = 'committed' WHERE sweep_id = $s", transaction, ("$s", sweepId));
            transaction.Commit();
            return version;
        }
    }

    /// <inheritdoc />
    public int CommitDerived(
        string atlasId,
        int parent,
        string kind,
        string optionsText,
        IReadOnlyList<(string TileKey, string TileHash, byte[] Payload)> addedTiles,
        (string KeyPattern, byte[] Payload)? blob,
        Func<IReadOnlyDictionary<string, string>, (string ContentHash, string Summary)> describe)
    {
        ArgumentNullException.ThrowIfNull(addedTiles);
        ArgumentNullException.ThrowIfNull(describe);
        lock (_gate)
        {
            var tiles = new SortedDictionary<string, string>(VersionTilesUnlocked(atlasId, parent), StringComparer.Ordinal);
            foreach (var (key, hash, _) in addedTiles)
            {
                tiles[key] = hash;
            }

            // Added tiles go in first (content-addressed, so a failed commit leaves only an unused tile), so that the
            // description can read them like any other tile of the version.
            using (var tileTransaction = _connection.BeginTransaction())
            {
                foreach (var (_, hash, payload) in addedTiles)
                {
                    Execute("INSERT OR IGNORE INTO tiles (tile_hash, payload) VALUES ($h, $p)", tileTransaction, ("$h", hash), ("$p", payload));
                }

                tileTransaction.Commit();
            }

            var (contentHash, summary) = describe(tiles);
            using var transaction = _connection.BeginTransaction();
            var version = Query("SELECT COALESCE(MAX(version), 0) + 1 FROM versions WHERE atlas_id = $a", r => r.GetInt32(0), transaction, ("$a", atlasId))[0];

            if (blob is { } extra)
            {
                Execute(
                    "INSERT OR REPLACE INTO blobs (blob_key, payload) VALUES ($k, $p)",
                    transaction,
                    ("$k", extra.KeyPattern.Replace("{version}", version.ToString(CultureInfo.InvariantCulture), StringComparison.Ordinal)),
                    ("$p", extra.Payload));
            }

            Execute(
                "INSERT INTO versions (atlas_id, version, parent, kind, created, options_text, content_hash, summary_json) VALUES ($a, $v, $p, $k, $c, $o, $h, $j)",
                transaction,
                ("$a", atlasId),
                ("$v", version),
                ("$p", parent),
                ("$k", kind),
                ("$c", Now()),
                ("$o", optionsText),
                ("$h", contentHash),
                ("$j", summary));
            foreach (var (key, hash) in tiles)
            {
                Execute(
                    "INSERT INTO version_tiles (atlas_id, version, tile_key, tile_hash) VALUES ($a, $v, $k, $h)",
                    transaction,
                    ("$a", atlasId),
                    ("$v", version),
                    ("$k", key),
                    ("$h", hash));
            }

            transaction.Commit();
            return version;
        }
    }

    /// <inheritdoc />
    public IReadOnlyList<AtlasVersionInfo> Versions(string atlasId)
    {
        lock (_gate)
        {
            return Query(
                "SELECT version, parent, kind, created, options_text, content_hash, summary_json FROM versions WHERE atlas_id = $a ORDER BY version",
                r => new AtlasVersionInfo(
                    r.GetInt32(0),
                    r.IsDBNull(1) ? null : r.GetInt32(1),
                    r.GetString(2),
                    DateTimeOffset.Parse(r.GetString(3), CultureInfo.InvariantCulture),
                    r.GetString(4),
                    r.GetString(5),
                    r.GetString(6)),
                ("$a", atlasId));
        }
    }

    /// <inheritdoc />
    public IReadOnlyDictionary<string, string> VersionTiles(string atlasId, int version)
    {
        lock (_gate)
        {
            return VersionTilesUnlocked(atlasId, version);
        }
    }

    /// <inheritdoc />
    public StoredTile Tile(string tileHash)
    {
        byte[]? payload;
        lock (_gate)
        {
            payload = Query("SELECT payload FROM tiles WHERE tile_hash = $h", r => (byte[])r[0], ("$h", tileHash)).FirstOrDefault();
        }

        if (payload is null)
        {
            throw new InputException(_source, $"tile {tileHash[..Math.Min(12, tileHash.Length)]}", "missing from the atlas file (the file is damaged)");
        }

        var actual = HashOf(payload);
        if (actual != tileHash)
        {
            throw new InputException(_source, $"tile {tileHash[..12]}", $"checksum mismatch (stored content hashes to {actual[..12]}): the file is damaged");
        }

        return new StoredTile(string.Empty, tileHash, payload);
    }

    /// <summary>SHA-256 (hex) of tile bytes: the tile's content hash.</summary>
    public static string HashOf(byte[] payload) => Convert.ToHexStringLower(SHA256.HashData(payload));

    /// <inheritdoc />
    public void Dispose() => _connection.Dispose();

    private void Prepare()
    {
        // Identify the file before changing anything: switching to WAL rewrites the database header, and a file of
        // another application must be refused as it was found.
        var applicationId = Query("PRAGMA application_id", r => r.GetInt32(0))[0];
        var userVersion = Query("PRAGMA user_version", r => r.GetInt32(0))[0];
        var tables = Query("SELECT COUNT(*) FROM sqlite_master WHERE type = 'table'", r => r.GetInt32(0))[0];
        if (applicationId != ApplicationId && tables > 0)
        {
            throw new InputException(_source, string.Empty, "not an atlas file (a SQLite database of another application)");
        }

        if (userVersion > SchemaVersion)
        {
            throw new InputException(_source, string.Empty, $"atlas schema version {userVersion} is newer than this build reads ({SchemaVersion}); upgrade fiber");
        }

        Execute("PRAGMA journal_mode = WAL");
        Execute("PRAGMA synchronous = NORMAL");
        Execute("PRAGMA foreign_keys = ON");

        for (var version = userVersion; version < SchemaVersion; version++)
        {
            using var transaction = _connection.BeginTransaction();
            Execute(Migrations[version], transaction);
            Execute($"PRAGMA user_version = {version + 1}", transaction);
            Execute($"PRAGMA application_id = {ApplicationId}", transaction);
            transaction.Commit();
        }
    }

    private (string FamilyHash, string FamilyJson)? FamilyUnlocked(string atlasId)
    {
        var rows = Query("SELECT family_hash, family_json FROM atlases WHERE atlas_id = $a", r => (r.GetString(0), r.GetString(1)), ("$a", atlasId));
        return rows.Count == 0 ? null : rows[0];
    }

    /// <summary>The options of the sweep behind a version: its own, or its nearest sweep ancestor's for derived versions.</summary>
    private string? SweepOptionsOfUnlocked(string atlasId, int version)
    {
        int? current = version;
        while (current is { } number)
        {
            var rows = Query(
                "SELECT kind, options_text, parent FROM versions WHERE atlas_id = $a AND version = $v",
                r => (Kind: r.GetString(0), Options: r.GetString(1), Parent: r.IsDBNull(2) ? (int?)null : r.GetInt32(2)),
                ("$a", atlasId),
                ("$v", number));
            if (rows.Count == 0)
            {
                return null;
            }

            if (rows[0].Kind == "sweep")
            {
                return rows[0].Options;
            }

            current = rows[0].Parent < number ? rows[0].Parent : null;
        }

        return null;
    }

    /// <summary>True for the keys of grid tiles (<c>L2:5,3</c>), false for derived tiles such as <c>learned:v4</c>.</summary>
    private static bool IsGridKey(string key) => key.Length > 1 && key[0] == 'L' && char.IsAsciiDigit(key[1]);

    private Dictionary<string, string> VersionTilesUnlocked(string atlasId, int version) =>
        Query(
            "SELECT tile_key, tile_hash FROM version_tiles WHERE atlas_id = $a AND version = $v",
            r => (r.GetString(0), r.GetString(1)),
            ("$a", atlasId),
            ("$v", version)).ToDictionary(t => t.Item1, t => t.Item2, StringComparer.Ordinal);

    private string Now() => _time.GetUtcNow().ToString("O", CultureInfo.InvariantCulture);

    private void Execute(string sql, params (string Name, object? Value)[] parameters) => Execute(sql, null, parameters);

    private void Execute(string sql, SqliteTransaction? transaction, params (string Name, object? Value)[] parameters)
    {
        using var command = Command(sql, transaction, parameters);
        command.ExecuteNonQuery();
    }

    private List<T> Query<T>(string sql, Func<SqliteDataReader, T> read, params (string Name, object? Value)[] parameters) =>
        Query(sql, read, null, parameters);

    private List<T> Query<T>(string sql, Func<SqliteDataReader, T> read, SqliteTransaction? transaction, params (string Name, object? Value)[] parameters)
    {
        using var command = Command(sql, transaction, parameters);
        using var reader = command.ExecuteReader();
        var rows = new List<T>();
        while (reader.Read())
        {
            rows.Add(read(reader));
        }

        return rows;
    }

    private SqliteCommand Command(string sql, SqliteTransaction? transaction, (string Name, object? Value)[] parameters)
    {
        var command = _connection.CreateCommand();
        command.CommandText = sql;
        command.Transaction = transaction;
        foreach (var (name, value) in parameters)
        {
            command.Parameters.AddWithValue(name, value ?? DBNull.Value);
        }

        return command;
    }
}
