using System.Buffers.Binary;
using System.Net.Sockets;
using System.Security.Cryptography;
using System.Text;
using FiberWorkers.Algebra.Families;
using FiberWorkers.Atlas.Stores;
using Npgsql;

namespace FiberWorkers.Cluster.Stores;

/// <summary>
/// The cluster's atlas store and sweep ledger in PostgreSQL, with the semantics of <see cref="SqliteAtlasStore"/>:
/// content-addressed tiles checked on read, immutable versions sharing tiles with their parent (grid tiles only under
/// the same sweep options), merges at most once per tile of a sweep, blobs whose first writer wins. Its tables live in
/// the schema <c>fiberworkers</c>, versioned in <c>fiberworkers.schema_version</c> and migrated on open. Every write
/// is one transaction, so a crash at any moment leaves the previous version intact.
/// </summary>
/// <remarks>
/// Concurrency: every call takes its own connection from Npgsql's pool and lets the server serialize what must be:
/// a row lock on the sweep (merges share it, the commit takes it exclusively, so no tile slips in after the commit
/// read the sweep), an advisory transaction lock per atlas (version numbers, the one running sweep per options),
/// and primary keys with ON CONFLICT (first writer wins). A single lock would serialize the many workers' merges
/// behind one slow commit for no gain. Safe for concurrent callers in one process; several coordinator processes are
/// not expected to share one database at the same time (the data stays consistent, but each would resume and run the
/// other's sweeps).
/// </remarks>
internal sealed class PostgresAtlasStore : ISweepLedger
{
    /// <summary>The schema version this build writes.</summary>
    public const int SchemaVersion = 1;

    /// <summary>The PostgreSQL schema (namespace) holding the tables.</summary>
    public const string Namespace = "fiberworkers";

    /// <summary>What <c>schema_version.application</c> holds in a database of ours.</summary>
    private const string Application = "FWK1";

    private const string Container = "the database";

    /// <summary>Schema migrations, applied in order on open, each in one transaction with its schema version; never edit one.</summary>
    private static readonly string[] Migrations =
    [
        // 1: atlases, content-addressed tiles, sweeps (with the version they committed), versions, blobs, kept sweep
        // requests and tile attempts.
        """
        CREATE TABLE atlases (atlas_id text PRIMARY KEY, family_hash text NOT NULL, family_json text NOT NULL);
        CREATE TABLE tiles (tile_hash text PRIMARY KEY, payload bytea NOT NULL);
        CREATE TABLE sweeps (
            sweep_id bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY, atlas_id text NOT NULL, options_text text NOT NULL,
            parent integer, state text NOT NULL CHECK (state IN ('running', 'committed')), created timestamptz NOT NULL, version integer);
        CREATE INDEX sweeps_running ON sweeps (atlas_id, options_text) WHERE state = 'running';
        CREATE TABLE sweep_tiles (sweep_id bigint NOT NULL REFERENCES sweeps, tile_key text NOT NULL, tile_hash text NOT NULL,
            PRIMARY KEY (sweep_id, tile_key));
        CREATE TABLE versions (
            atlas_id text NOT NULL REFERENCES atlases, version integer NOT NULL, parent integer, kind text NOT NULL,
            created timestamptz NOT NULL, options_text text NOT NULL, content_hash text NOT NULL, summary_json text NOT NULL,
            PRIMARY KEY (atlas_id, version));
        CREATE TABLE version_tiles (atlas_id text NOT NULL, version integer NOT NULL, tile_key text NOT NULL, tile_hash text NOT NULL,
            PRIMARY KEY (atlas_id, version, tile_key), FOREIGN KEY (atlas_id, version) REFERENCES versions);
        CREATE TABLE blobs (blob_key text PRIMARY KEY, payload bytea NOT NULL);
        CREATE TABLE sweep_requests (sweep_id bigint PRIMARY KEY REFERENCES sweeps, atlas_id text NOT NULL, request bytea NOT NULL,
            created timestamptz NOT NULL);
        CREATE TABLE tile_attempts (
            attempt_id bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY, sweep_id bigint NOT NULL REFERENCES sweeps,
            tile_key text NOT NULL, attempt integer NOT NULL, worker text NOT NULL, started timestamptz NOT NULL,
            seconds double precision NOT NULL, outcome text NOT NULL, detail text NOT NULL);
        CREATE INDEX tile_attempts_by_sweep ON tile_attempts (sweep_id, attempt_id);
        """,
    ];

    private readonly NpgsqlDataSource _data;
    private readonly string _source;
    private readonly TimeProvider _time;

    private PostgresAtlasStore(NpgsqlDataSource data, string source, TimeProvider time)
    {
        _data = data;
        _source = source;
        _time = time;
    }

    /// <summary>
    /// Connects, creates or migrates the schema, and returns the store. A malformed connection string, an unreachable
    /// server, a refused login or a database of a newer schema is an <see cref="InputException"/> naming the server
    /// (host, port, database; never the password).
    /// </summary>
    public static PostgresAtlasStore Open(string connectionString, TimeProvider? time = null)
    {
        ArgumentNullException.ThrowIfNull(connectionString);
        NpgsqlConnectionStringBuilder builder;
        try
        {
            builder = new NpgsqlConnectionStringBuilder(connectionString);
        }
        catch (Exception e) when (e is ArgumentException or FormatException or InvalidCastException)
        {
            // The message names the offending keyword at most; the string itself may hold a password.
            throw new InputException("postgres", "connection string", $"not of the form Key=Value;… as Npgsql reads it ({e.Message.TrimEnd('.')})");
        }

        if (string.IsNullOrWhiteSpace(builder.Host))
        {
            throw new InputException("postgres", "connection string", "names no server (Host=…)");
        }

        var source = $"postgres {builder.Host}:{builder.Port}/{builder.Database ?? builder.Username ?? "(default database)"}";
        builder.SearchPath = Namespace;
        builder.ApplicationName ??= "fiberworkers";
        var data = new NpgsqlDataSourceBuilder(builder.ConnectionString).Build();
        try
        {
            var store = new PostgresAtlasStore(data, source, time ?? TimeProvider.System);
            store.Prepare();
            return store;
        }
        catch (NpgsqlException e)
        {
            data.Dispose();
            throw CannotOpen(source, builder, e);
        }
        catch
        {
            data.Dispose();
            throw;
        }
    }

    /// <inheritdoc />
    public void EnsureAtlas(string atlasId, string familyHash, string familyJson)
    {
        ArgumentNullException.ThrowIfNull(atlasId);
        ArgumentNullException.ThrowIfNull(familyHash);
        ArgumentNullException.ThrowIfNull(familyJson);
        using var connection = _data.OpenConnection();
        Execute(
            connection, null, "INSERT INTO atlases (atlas_id, family_hash, family_json) VALUES (@a, @h, @j) ON CONFLICT (atlas_id) DO NOTHING", ("a", atlasId), ("h", familyHash), ("j", familyJson));
        var known = Query(connection, null, "SELECT family_hash FROM atlases WHERE atlas_id = @a", r => r.GetString(0), ("a", atlasId)).Single();
        if (known != familyHash)
        {
            throw new InputException(
                _source, $"atlas '{atlasId}'", $"holds another family (content {known[..Math.Min(12, known.Length)]}), not this one ({familyHash[..Math.Min(12, familyHash.Length)]})");
        }
    }

    /// <inheritdoc />
    public (string FamilyHash, string FamilyJson)? Family(string atlasId)
    {
        ArgumentNullException.ThrowIfNull(atlasId);
        using var connection = _data.OpenConnection();
        var rows = Query(connection, null, "SELECT family_hash, family_json FROM atlases WHERE atlas_id = @a", r => (r.GetString(0), r.GetString(1)), ("a", atlasId));
        return rows.Count == 0 ? null : rows[0];
    }

    /// <inheritdoc />
    public IReadOnlyList<string> Atlases()
    {
        using var connection = _data.OpenConnection();
        return Query(connection, null, "SELECT atlas_id FROM atlases ORDER BY atlas_id COLLATE \"C\"", r => r.GetString(0));
    }

    /// <inheritdoc />
    public byte[]? GetBlob(string key)
    {
        ArgumentNullException.ThrowIfNull(key);
        using var connection = _data.OpenConnection();
        return Query(connection, null, "SELECT payload FROM blobs WHERE blob_key = @k", r => r.GetFieldValue<byte[]>(0), ("k", key)).FirstOrDefault();
    }

    /// <inheritdoc />
    public void PutBlob(string key, byte[] payload)
    {
        ArgumentNullException.ThrowIfNull(key);
        ArgumentNullException.ThrowIfNull(payload);
        using var connection = _data.OpenConnection();
        Execute(connection, null, "INSERT INTO blobs (blob_key, payload) VALUES (@k, @p) ON CONFLICT (blob_key) DO NOTHING", ("k", key), ("p", payload));
    }

    /// <inheritdoc />
    public (long SweepId, IReadOnlyDictionary<string, string> Finished) BeginOrResumeSweep(string atlasId, string optionsText, int? parent)
    {
        ArgumentNullException.ThrowIfNull(atlasId);
        ArgumentNullException.ThrowIfNull(optionsText);
        using var connection = _data.OpenConnection();
        using var transaction = connection.BeginTransaction();
        LockAtlas(connection, transaction, atlasId);
        var running = Query(
            connection,
            transaction,
            "SELECT sweep_id FROM sweeps WHERE atlas_id = @a AND options_text = @o AND state = 'running' ORDER BY sweep_id DESC LIMIT 1",
            r => r.GetInt64(0),
            ("a", atlasId),
            ("o", optionsText));
        if (running.Count > 0)
        {
            var finished = SweepTiles(connection, transaction, running[0]);
            transaction.Commit();
            return (running[0], finished);
        }

        var id = Query(
            connection,
            transaction,
            "INSERT INTO sweeps (atlas_id, options_text, parent, state, created) VALUES (@a, @o, @p, 'running', @c) RETURNING sweep_id",
            r => r.GetInt64(0),
            ("a", atlasId),
            ("o", optionsText),
            ("p", parent),
            ("c", Now())).Single();
        transaction.Commit();
        return (id, new Dictionary<string, string>(StringComparer.Ordinal));
    }

    /// <inheritdoc />
    public void PutTile(long sweepId, string tileKey, string tileHash, byte[] payload)
    {
        AtlasStoreRules.CheckTile(tileKey, tileHash, payload);
        using var connection = _data.OpenConnection();
        using var transaction = connection.BeginTransaction();
        _ = FindSweep(connection, transaction, sweepId, lockRow: "FOR SHARE") ?? throw NoSweep(sweepId);
        Execute(connection, transaction, "INSERT INTO tiles (tile_hash, payload) VALUES (@h, @p) ON CONFLICT (tile_hash) DO NOTHING", ("h", tileHash), ("p", payload));
        Execute(
            connection,
            transaction,
            "INSERT INTO sweep_tiles (sweep_id, tile_key, tile_hash) VALUES (@s, @k, @h) ON CONFLICT (sweep_id, tile_key) DO UPDATE SET tile_hash = EXCLUDED.tile_hash",
            ("s", sweepId),
            ("k", tileKey),
            ("h", tileHash));
        transaction.Commit();
    }

    /// <inheritdoc />
    public bool MergeTile(long sweepId, string tileKey, string tileHash, byte[] payload)
    {
        AtlasStoreRules.CheckTile(tileKey, tileHash, payload);
        using var connection = _data.OpenConnection();
        using var transaction = connection.BeginTransaction();

        // The shared row lock lets merges run side by side and keeps a commit (which takes the row exclusively) from
        // reading the sweep's tiles while one is on its way in.
        var sweep = FindSweep(connection, transaction, sweepId, lockRow: "FOR SHARE") ?? throw NoSweep(sweepId);
        if (sweep.State != "running")
        {
            return false;
        }

        // The sweep's row for the key decides: of concurrent merges one inserts it, the others wait for that
        // transaction and then find the key taken. The tile goes in only after, so a losing merge stores nothing.
        var merged = Execute(
            connection,
            transaction,
            "INSERT INTO sweep_tiles (sweep_id, tile_key, tile_hash) VALUES (@s, @k, @h) ON CONFLICT (sweep_id, tile_key) DO NOTHING",
            ("s", sweepId),
            ("k", tileKey),
            ("h", tileHash)) == 1;
        if (!merged)
        {
            return false;
        }

        Execute(connection, transaction, "INSERT INTO tiles (tile_hash, payload) VALUES (@h, @p) ON CONFLICT (tile_hash) DO NOTHING", ("h", tileHash), ("p", payload));
        transaction.Commit();
        return true;
    }

    /// <inheritdoc />
    public int CommitSweep(long sweepId, string kind, Func<IReadOnlyDictionary<string, string>, (string ContentHash, string Summary)> describe)
    {
        ArgumentNullException.ThrowIfNull(kind);
        ArgumentNullException.ThrowIfNull(describe);
        using var connection = _data.OpenConnection();
        using var transaction = connection.BeginTransaction();
        var sweep = FindSweep(connection, transaction, sweepId, lockRow: "FOR UPDATE") ?? throw NoSweep(sweepId);
        if (sweep.State != "running")
        {
            throw new InvalidOperationException($"sweep {sweepId} is already committed");
        }

        LockAtlas(connection, transaction, sweep.AtlasId);
        var tiles = AtlasStoreRules.SweepVersionTiles(
            sweep.Parent is { } parent ? VersionTiles(connection, transaction, sweep.AtlasId, parent) : null,
            sweep.Parent is { } parentVersion ? AtlasStoreRules.SweepOptionsOf(parentVersion, v => VersionLink(connection, transaction, sweep.AtlasId, v)) : null,
            sweep.OptionsText,
            SweepTiles(connection, transaction, sweepId));

        // Described inside the transaction (the description may read tiles through other connections): the sweep
        // stays locked, so what is described is what is committed.
        var (contentHash, summary) = describe(tiles);
        var version = InsertVersion(connection, transaction, sweep.AtlasId, sweep.Parent, kind, sweep.OptionsText, contentHash, summary, tiles);
        Execute(connection, transaction, "UPDATE sweeps SET state = 'committed', version = @v WHERE sweep_id = @s", ("v", version), ("s", sweepId));
        transaction.Commit();
        return version;
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
        AtlasStoreRules.CheckDerived(atlasId, kind, optionsText, addedTiles, describe);

        using var connection = _data.OpenConnection();
        if (VersionLink(connection, null, atlasId, parent) is null)
        {
            throw new InvalidOperationException($"atlas '{atlasId}' has no version {parent} to derive from");
        }

        var tiles = new SortedDictionary<string, string>(VersionTiles(connection, null, atlasId, parent), StringComparer.Ordinal);
        foreach (var (key, hash, _) in addedTiles)
        {
            tiles[key] = hash;
        }

        // Added tiles go in first (content-addressed, so a failed commit leaves only an unused tile), so that the
        // description can read them like any other tile of the version.
        using (var tileTransaction = connection.BeginTransaction())
        {
            foreach (var (_, hash, payload) in addedTiles)
            {
                Execute(connection, tileTransaction, "INSERT INTO tiles (tile_hash, payload) VALUES (@h, @p) ON CONFLICT (tile_hash) DO NOTHING", ("h", hash), ("p", payload));
            }

            tileTransaction.Commit();
        }

        var (contentHash, summary) = describe(tiles);
        using var transaction = connection.BeginTransaction();
        LockAtlas(connection, transaction, atlasId);
        var version = InsertVersion(connection, transaction, atlasId, parent, kind, optionsText, contentHash, summary, tiles);
        if (blob is { } extra)
        {
            Execute(
                connection,
                transaction,
                "INSERT INTO blobs (blob_key, payload) VALUES (@k, @p) ON CONFLICT (blob_key) DO UPDATE SET payload = EXCLUDED.payload",
                ("k", AtlasStoreRules.BlobKey(extra.KeyPattern, version)),
                ("p", extra.Payload));
        }

        transaction.Commit();
        return version;
    }

    /// <inheritdoc />
    public IReadOnlyList<AtlasVersionInfo> Versions(string atlasId)
    {
        ArgumentNullException.ThrowIfNull(atlasId);
        using var connection = _data.OpenConnection();
        return Query(
            connection,
            null,
            "SELECT version, parent, kind, created, options_text, content_hash, summary_json FROM versions WHERE atlas_id = @a ORDER BY version",
            r => new AtlasVersionInfo(
                r.GetInt32(0),
                r.IsDBNull(1) ? null : r.GetInt32(1),
                r.GetString(2),
                r.GetFieldValue<DateTimeOffset>(3),
                r.GetString(4),
                r.GetString(5),
                r.GetString(6)),
            ("a", atlasId));
    }

    /// <inheritdoc />
    public IReadOnlyDictionary<string, string> VersionTiles(string atlasId, int version)
    {
        ArgumentNullException.ThrowIfNull(atlasId);
        using var connection = _data.OpenConnection();
        return VersionTiles(connection, null, atlasId, version);
    }

    /// <inheritdoc />
    public StoredTile Tile(string tileHash)
    {
        ArgumentNullException.ThrowIfNull(tileHash);
        byte[]? payload;
        using (var connection = _data.OpenConnection())
        {
            payload = Query(connection, null, "SELECT payload FROM tiles WHERE tile_hash = @h", r => r.GetFieldValue<byte[]>(0), ("h", tileHash)).FirstOrDefault();
        }

        return AtlasStoreRules.VerifiedTile(_source, Container, tileHash, payload);
    }

    /// <inheritdoc />
    public void SaveSweepRequest(long sweepId, string atlasId, byte[] request)
    {
        ArgumentNullException.ThrowIfNull(atlasId);
        ArgumentNullException.ThrowIfNull(request);
        using var connection = _data.OpenConnection();
        var sweep = FindSweep(connection, null, sweepId, lockRow: string.Empty) ?? throw NoSweep(sweepId);
        if (sweep.AtlasId != atlasId)
        {
            throw new ArgumentException($"sweep {sweepId} belongs to atlas '{sweep.AtlasId}', not '{atlasId}'", nameof(atlasId));
        }

        Execute(
            connection,
            null,
            "INSERT INTO sweep_requests (sweep_id, atlas_id, request, created) VALUES (@s, @a, @r, @c) ON CONFLICT (sweep_id) DO NOTHING",
            ("s", sweepId),
            ("a", atlasId),
            ("r", request),
            ("c", Now()));
    }

    /// <inheritdoc />
    public IReadOnlyList<SweepRequestRecord> UnfinishedSweepRequests()
    {
        using var connection = _data.OpenConnection();
        return Query(
            connection,
            null,
            "SELECT r.sweep_id, r.atlas_id, r.request FROM sweep_requests r JOIN sweeps s ON s.sweep_id = r.sweep_id WHERE s.state = 'running' ORDER BY r.sweep_id",
            r => new SweepRequestRecord(r.GetInt64(0), r.GetString(1), r.GetFieldValue<byte[]>(2)));
    }

    /// <inheritdoc />
    public SweepRecord? Sweep(long sweepId)
    {
        using var connection = _data.OpenConnection();
        if (FindSweep(connection, null, sweepId, lockRow: string.Empty) is not { } sweep)
        {
            return null;
        }

        var finished = Query(connection, null, "SELECT COUNT(*) FROM sweep_tiles WHERE sweep_id = @s", r => r.GetInt64(0), ("s", sweepId)).Single();
        return new SweepRecord(sweepId, sweep.AtlasId, sweep.OptionsText, sweep.Parent, sweep.State, sweep.Version, checked((int)finished));
    }

    /// <inheritdoc />
    public void RecordAttempt(TileAttempt attempt)
    {
        AtlasStoreRules.CheckAttempt(attempt);
        var kept = AtlasStoreRules.Normalized(attempt);
        using var connection = _data.OpenConnection();
        _ = FindSweep(connection, null, kept.SweepId, lockRow: string.Empty) ?? throw NoSweep(kept.SweepId);
        Execute(
            connection,
            null,
            "INSERT INTO tile_attempts (sweep_id, tile_key, attempt, worker, started, seconds, outcome, detail) VALUES (@s, @k, @n, @w, @t, @d, @o, @x)",
            ("s", kept.SweepId),
            ("k", kept.TileKey),
            ("n", kept.Attempt),
            ("w", kept.Worker),
            ("t", kept.Started),
            ("d", kept.Seconds),
            ("o", kept.Outcome),
            ("x", kept.Detail));
    }

    /// <inheritdoc />
    public IReadOnlyList<TileAttempt> Attempts(long sweepId)
    {
        using var connection = _data.OpenConnection();
        return Query(
            connection,
            null,
            "SELECT sweep_id, tile_key, attempt, worker, started, seconds, outcome, detail FROM tile_attempts WHERE sweep_id = @s ORDER BY attempt_id",
            r => new TileAttempt(r.GetInt64(0), r.GetString(1), r.GetInt32(2), r.GetString(3), r.GetFieldValue<DateTimeOffset>(4), r.GetDouble(5), r.GetString(6), r.GetString(7)),
            ("s", sweepId));
    }

    /// <inheritdoc />
    public void Dispose() => _data.Dispose();

    private void Prepare()
    {
        using var connection = _data.OpenConnection();
        using var transaction = connection.BeginTransaction();

        // One opener at a time migrates (a fixed advisory key; PostgreSQL's DDL is transactional, so a failed
        // migration leaves the previous schema as it was).
        Execute(connection, transaction, "SELECT pg_advisory_xact_lock(@k)", ("k", LockKey("schema")));
        Execute(connection, transaction, $"CREATE SCHEMA IF NOT EXISTS {Namespace}");
        var tables = Query(
            connection,
            transaction,
            "SELECT table_name::text FROM information_schema.tables WHERE table_schema = @n",
            r => r.GetString(0),
            ("n", Namespace));
        if (tables.Count > 0 && !tables.Contains("schema_version"))
        {
            throw new InputException(_source, $"schema {Namespace}", $"holds tables of another application ({string.Join(", ", tables.Order(StringComparer.Ordinal).Take(5))}); use another database");
        }

        Execute(connection, transaction, "CREATE TABLE IF NOT EXISTS schema_version (application text NOT NULL, version integer NOT NULL)");
        var rows = Query(connection, transaction, "SELECT application, version FROM schema_version", r => (r.GetString(0), r.GetInt32(1)));
        if (rows.Count > 1 || (rows.Count == 1 && rows[0].Item1 != Application))
        {
            throw new InputException(_source, $"schema {Namespace}", "its schema_version table is not ours; use another database");
        }

        var version = rows.Count == 0 ? 0 : rows[0].Item2;
        if (version > SchemaVersion)
        {
            throw new InputException(_source, string.Empty, $"store schema version {version} is newer than this build reads ({SchemaVersion}); upgrade fiber");
        }

        if (rows.Count == 0)
        {
            Execute(connection, transaction, "INSERT INTO schema_version (application, version) VALUES (@a, 0)", ("a", Application));
        }

        for (; version < SchemaVersion; version++)
        {
            Execute(connection, transaction, Migrations[version]);
            Execute(connection, transaction, "UPDATE schema_version SET version = @v", ("v", version + 1));
        }

        transaction.Commit();
    }

    private int InsertVersion(
        NpgsqlConnection connection, NpgsqlTransaction transaction, string atlasId, int? parent, string kind, string optionsText, string contentHash, string summary,
        IReadOnlyDictionary<string, string> tiles)
    {
        if (Query(connection, transaction, "SELECT 1 FROM atlases WHERE atlas_id = @a", r => r.GetInt32(0), ("a", atlasId)).Count == 0)
        {
            throw new InvalidOperationException($"atlas '{atlasId}' is not in the store: EnsureAtlas comes before the first version");
        }

        var version = Query(connection, transaction, "SELECT COALESCE(MAX(version), 0) + 1 FROM versions WHERE atlas_id = @a", r => r.GetInt32(0), ("a", atlasId)).Single();
        Execute(
            connection,
            transaction,
            "INSERT INTO versions (atlas_id, version, parent, kind, created, options_text, content_hash, summary_json) VALUES (@a, @v, @p, @k, @c, @o, @h, @j)",
            ("a", atlasId),
            ("v", version),
            ("p", parent),
            ("k", kind),
            ("c", Now()),
            ("o", optionsText),
            ("h", contentHash),
            ("j", summary));
        Execute(
            connection,
            transaction,
            "INSERT INTO version_tiles (atlas_id, version, tile_key, tile_hash) SELECT @a, @v, t.key, t.hash FROM unnest(@keys, @hashes) AS t(key, hash)",
            ("a", atlasId),
            ("v", version),
            ("keys", tiles.Keys.ToArray()),
            ("hashes", tiles.Values.ToArray()));
        return version;
    }

    private static SweepRow? FindSweep(NpgsqlConnection connection, NpgsqlTransaction? transaction, long sweepId, string lockRow)
    {
        var rows = Query(
            connection,
            transaction,
            $"SELECT atlas_id, options_text, parent, state, version FROM sweeps WHERE sweep_id = @s {lockRow}",
            r => new SweepRow(r.GetString(0), r.GetString(1), r.IsDBNull(2) ? null : r.GetInt32(2), r.GetString(3), r.IsDBNull(4) ? null : r.GetInt32(4)),
            ("s", sweepId));
        return rows.Count == 0 ? null : rows[0];
    }

    private static Dictionary<string, string> SweepTiles(NpgsqlConnection connection, NpgsqlTransaction? transaction, long sweepId) =>
        Query(connection, transaction, "SELECT tile_key, tile_hash FROM sweep_tiles WHERE sweep_id = @s", r => (r.GetString(0), r.GetString(1)), ("s", sweepId))
            .ToDictionary(t => t.Item1, t => t.Item2, StringComparer.Ordinal);

    private static Dictionary<string, string> VersionTiles(NpgsqlConnection connection, NpgsqlTransaction? transaction, string atlasId, int version) =>
        Query(
            connection,
            transaction,
            "SELECT tile_key, tile_hash FROM version_tiles WHERE atlas_id = @a AND version = @v",
            r => (r.GetString(0), r.GetString(1)),
            ("a", atlasId),
            ("v", version)).ToDictionary(t => t.Item1, t => t.Item2, StringComparer.Ordinal);

    private static (string Kind, string Options, int? Parent)? VersionLink(NpgsqlConnection connection, NpgsqlTransaction? transaction, string atlasId, int version)
    {
        var rows = Query(
            connection,
            transaction,
            "SELECT kind, options_text, parent FROM versions WHERE atlas_id = @a AND version = @v",
            r => (r.GetString(0), r.GetString(1), r.IsDBNull(2) ? (int?)null : r.GetInt32(2)),
            ("a", atlasId),
            ("v", version));
        return rows.Count == 0 ? null : rows[0];
    }

    /// <summary>Serializes version numbering and sweep creation per atlas until the transaction ends.</summary>
    private static void LockAtlas(NpgsqlConnection connection, NpgsqlTransaction transaction, string atlasId) =>
        Execute(connection, transaction, "SELECT pg_advisory_xact_lock(@k)", ("k", LockKey($"atlas:{atlasId}")));

    /// <summary>A 64-bit advisory lock key: the first bytes of SHA-256 over a name of ours (collisions only serialize more).</summary>
    private static long LockKey(string name) =>
        BinaryPrimitives.ReadInt64LittleEndian(SHA256.HashData(Encoding.UTF8.GetBytes($"fiberworkers:{name}")));

    private static InvalidOperationException NoSweep(long sweepId) => new($"no sweep {sweepId} in the store");

    /// <summary>An opening failure as an input error: where the server is and why, never the password or a stack trace.</summary>
    private static InputException CannotOpen(string source, NpgsqlConnectionStringBuilder builder, NpgsqlException e)
    {
        var server = $"{builder.Host}:{builder.Port}";
        var message = e switch
        {
            PostgresException refused => $"the server at {server} refused: {refused.MessageText} (SQLSTATE {refused.SqlState})",
            _ when Inner<SocketException>(e) is { } socket => $"cannot reach the server at {server} ({socket.SocketErrorCode}: {socket.Message.TrimEnd('.')}); check the host, the port and that PostgreSQL runs",
            _ when Inner<TimeoutException>(e) is not null => $"no answer from the server at {server} within {builder.Timeout} s; check the host, the port and the network",
            _ => $"cannot connect to the server at {server} ({e.Message.TrimEnd('.')})",
        };
        return new InputException(source, string.Empty, message);
    }

    private static T? Inner<T>(Exception e)
        where T : Exception
    {
        for (Exception? current = e; current is not null; current = current.InnerException)
        {
            if (current is T found)
            {
                return found;
            }
        }

        return null;
    }

    private DateTimeOffset Now() => _time.GetUtcNow().ToUniversalTime();

    private static int Execute(NpgsqlConnection connection, NpgsqlTransaction? transaction, string sql, params (string Name, object? Value)[] parameters)
    {
        using var command = Command(connection, transaction, sql, parameters);
        return command.ExecuteNonQuery();
    }

    private static List<T> Query<T>(NpgsqlConnection connection, NpgsqlTransaction? transaction, string sql, Func<NpgsqlDataReader, T> read, params (string Name, object? Value)[] parameters)
    {
        using var command = Command(connection, transaction, sql, parameters);
        using var reader = command.ExecuteReader();
        var rows = new List<T>();
        while (reader.Read())
        {
            rows.Add(read(reader));
        }

        return rows;
    }

    private static NpgsqlCommand Command(NpgsqlConnection connection, NpgsqlTransaction? transaction, string sql, (string Name, object? Value)[] parameters)
    {
        var command = new NpgsqlCommand(sql, connection, transaction);
        foreach (var (name, value) in parameters)
        {
            command.Parameters.AddWithValue(name, value ?? DBNull.Value);
        }

        return command;
    }

    private sealed record SweepRow(string AtlasId, string OptionsText, int? Parent, string State, int? Version);
}
