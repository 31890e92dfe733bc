using System.Globalization;
using FiberWorkers.Algebra.Families;
using Microsoft.Data.Sqlite;

namespace FiberWorkers.Atlas.Stores;

/// <summary>
/// The embedded atlas store and sweep ledger: one SQLite file in WAL mode, schema versioned and migrated on open. Every
/// write is a transaction, so killing the process at any moment leaves every committed version intact and a sweep
/// resumable. Tiles are content-addressed (SHA-256 of the encoded result) and every other row carries a row check;
/// both are compared on every read, so a damaged file is an <see cref="InputException"/>, never another answer. One
/// connection, guarded by a lock: safe for concurrent callers in one process (writes are serialized).
/// </summary>
public sealed class SqliteAtlasStore : ISweepLedger
{
    /// <summary>Marks the file as ours (PRAGMA application_id): "FWK1".</summary>
    private const int ApplicationId = 0x46574B31;

    /// <summary>The schema version this build writes.</summary>
    public const int SchemaVersion = 2;

    private const string Container = "the atlas file";

    // Column lists in row-check order: the check of a row is RowCheck.Of over these values, and every SELECT of a
    // checked table reads them in this order followed by row_check.
    private const string AtlasColumns = "atlas_id, family_hash, family_json, latest_version";
    private const string SweepColumns = "sweep_id, atlas_id, options_text, parent, state, created, version";
    private const string SweepTileColumns = "sweep_id, tile_key, tile_hash";
    private const string VersionColumns = "atlas_id, version, parent, kind, created, options_text, content_hash, summary_json, tiles_check";
    private const string BlobColumns = "blob_key, payload";
    private const string RequestColumns = "sweep_id, atlas_id, request, created";
    private const string AttemptColumns = "attempt_id, sweep_id, tile_key, attempt, worker, started, seconds, outcome, detail";

    private static readonly (string Table, string Columns)[] CheckedTables =
    [
        ("atlases", AtlasColumns), ("sweeps", SweepColumns), ("sweep_tiles", SweepTileColumns), ("versions", VersionColumns),
        ("blobs", BlobColumns), ("sweep_requests", RequestColumns), ("tile_attempts", AttemptColumns),
    ];

    /// <summary>Schema migrations, applied in order on open, each in one transaction with its schema version; never edit one.</summary>
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

        // 2: the sweep ledger (kept requests, the version a sweep committed, tile attempts), each atlas's latest
        // version, and a row check on every row that is not content-addressed. Rows of a version 1 file get their
        // sweep's version (when exactly one version matches it) here, and their checks from the backfill below.
        """
        ALTER TABLE atlases ADD COLUMN latest_version INTEGER;
        ALTER TABLE atlases ADD COLUMN row_check TEXT;
        ALTER TABLE sweeps ADD COLUMN version INTEGER;
        ALTER TABLE sweeps ADD COLUMN row_check TEXT;
        ALTER TABLE sweep_tiles ADD COLUMN row_check TEXT;
        ALTER TABLE versions ADD COLUMN tiles_check TEXT;
        ALTER TABLE versions ADD COLUMN row_check TEXT;
        ALTER TABLE blobs ADD COLUMN row_check TEXT;
        CREATE TABLE sweep_requests (sweep_id INTEGER PRIMARY KEY, atlas_id TEXT NOT NULL, request BLOB NOT NULL, created TEXT NOT NULL,
            row_check TEXT NOT NULL);
        CREATE TABLE tile_attempts (
            attempt_id INTEGER PRIMARY KEY, sweep_id INTEGER NOT NULL, tile_key TEXT NOT NULL, attempt INTEGER NOT NULL,
            worker TEXT NOT NULL, started TEXT NOT NULL, seconds REAL NOT NULL, outcome TEXT NOT NULL, detail TEXT NOT NULL,
            row_check TEXT NOT NULL);
        CREATE INDEX tile_attempts_by_sweep ON tile_attempts (sweep_id, attempt_id);
        UPDATE atlases SET latest_version = (SELECT MAX(v.version) FROM versions v WHERE v.atlas_id = atlases.atlas_id);
        UPDATE sweeps SET version = (
                SELECT v.version FROM versions v
                WHERE v.atlas_id = sweeps.atlas_id AND v.options_text = sweeps.options_text AND v.parent IS sweeps.parent)
            WHERE state = 'committed'
              AND (SELECT COUNT(*) FROM versions v
                   WHERE v.atlas_id = sweeps.atlas_id AND v.options_text = sweeps.options_text AND v.parent IS sweeps.parent) = 1
              AND (SELECT COUNT(*) FROM sweeps s
                   WHERE s.state = 'committed' AND s.atlas_id = sweeps.atlas_id AND s.options_text = sweeps.options_text AND s.parent IS sweeps.parent) = 1;
        """,
    ];

    /// <summary>What a migration computes in code after its SQL, in the same transaction (null: nothing).</summary>
    private static readonly Action<SqliteAtlasStore, SqliteTransaction>?[] Backfills =
    [
        null,
        (store, transaction) => store.BackfillChecks(transaction),
    ];

    private static readonly Lazy<List<string>> ExpectedSchema = new(BuildExpectedSchema);

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

        // SQLite takes a file shorter than its 100-byte header for an empty database; an empty file is a new atlas, a
        // few bytes are what is left of a truncated one.
        if (File.Exists(path) && new FileInfo(path).Length is > 0 and < 100 and var length)
        {
            throw new InputException(source, string.Empty, $"not an atlas file, or one truncated to {length} bytes (a SQLite file has at least 100)");
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
            throw new InputException(source, string.Empty, e.SqliteErrorCode == 14 ? $"cannot open the file ({Reason(e)})" : $"not an atlas file ({Reason(e)})");
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
        ArgumentNullException.ThrowIfNull(atlasId);
        ArgumentNullException.ThrowIfNull(familyHash);
        ArgumentNullException.ThrowIfNull(familyJson);
        lock (_gate)
        {
            var existing = AtlasRowUnlocked(atlasId, null);
            if (existing is { } known)
            {
                if (known.FamilyHash != familyHash)
                {
                    throw new InputException(
                        _source, $"atlas '{atlasId}'", $"holds another family (content {AtlasStoreRules.Short(known.FamilyHash)}), not this one ({AtlasStoreRules.Short(familyHash)})");
                }

                return;
            }

            Execute(
                $"INSERT INTO atlases ({AtlasColumns}, row_check) VALUES ($a, $h, $j, NULL, $c)",
                ("$a", atlasId),
                ("$h", familyHash),
                ("$j", familyJson),
                ("$c", RowCheck.Of(atlasId, familyHash, familyJson, null)));
        }
    }

    /// <inheritdoc />
    public (string FamilyHash, string FamilyJson)? Family(string atlasId)
    {
        lock (_gate)
        {
            return AtlasRowUnlocked(atlasId, null) is { } row ? (row.FamilyHash, row.FamilyJson) : null;
        }
    }

    /// <inheritdoc />
    public IReadOnlyList<string> Atlases()
    {
        lock (_gate)
        {
            var rows = Query($"SELECT {AtlasColumns}, row_check FROM atlases ORDER BY atlas_id", Values);
            return [.. rows.Select(r => (string)Verified(r, "the atlas list")[0]!)];
        }
    }

    /// <inheritdoc />
    public byte[]? GetBlob(string key)
    {
        ArgumentNullException.ThrowIfNull(key);
        lock (_gate)
        {
            var rows = Query($"SELECT {BlobColumns}, row_check FROM blobs WHERE blob_key = $k", Values, ("$k", key));
            return rows.Count == 0 ? null : (byte[])Verified(rows[0], $"blob '{key}'", key)[1]!;
        }
    }

    /// <inheritdoc />
    public void PutBlob(string key, byte[] payload)
    {
        ArgumentNullException.ThrowIfNull(key);
        ArgumentNullException.ThrowIfNull(payload);
        lock (_gate)
        {
            Execute($"INSERT OR IGNORE INTO blobs ({BlobColumns}, row_check) VALUES ($k, $p, $c)", ("$k", key), ("$p", payload), ("$c", RowCheck.Of(key, payload)));
        }
    }

    /// <inheritdoc />
    public (long SweepId, IReadOnlyDictionary<string, string> Finished) BeginOrResumeSweep(string atlasId, string optionsText, int? parent)
    {
        ArgumentNullException.ThrowIfNull(atlasId);
        ArgumentNullException.ThrowIfNull(optionsText);
        lock (_gate)
        {
            var running = Query(
                $"SELECT {SweepColumns}, row_check FROM sweeps WHERE atlas_id = $a AND options_text = $o AND state = 'running' ORDER BY sweep_id DESC LIMIT 1",
                Values,
                ("$a", atlasId),
                ("$o", optionsText));
            if (running.Count > 0)
            {
                var sweepId = (long)Verified(running[0], $"sweep {running[0][0]}")[0]!;
                return (sweepId, SweepTilesUnlocked(sweepId, null));
            }

            using var transaction = _connection.BeginTransaction();
            var created = Now();
            Execute(
                "INSERT INTO sweeps (atlas_id, options_text, parent, state, created) VALUES ($a, $o, $p, 'running', $c)",
                transaction,
                ("$a", atlasId),
                ("$o", optionsText),
                ("$p", parent),
                ("$c", created));
            var id = Query("SELECT last_insert_rowid()", r => r.GetInt64(0), transaction)[0];
            Execute(
                "UPDATE sweeps SET row_check = $k WHERE sweep_id = $s",
                transaction,
                ("$k", RowCheck.Of(id, atlasId, optionsText, parent, "running", created, null)),
                ("$s", id));
            transaction.Commit();
            return (id, new Dictionary<string, string>(StringComparer.Ordinal));
        }
    }

    /// <inheritdoc />
    public void PutTile(long sweepId, string tileKey, string tileHash, byte[] payload)
    {
        AtlasStoreRules.CheckTile(tileKey, tileHash, payload);
        lock (_gate)
        {
            _ = SweepRowUnlocked(sweepId, null) ?? throw NoSweep(sweepId);
            using var transaction = _connection.BeginTransaction();
            Execute("INSERT OR IGNORE INTO tiles (tile_hash, payload) VALUES ($h, $p)", transaction, ("$h", tileHash), ("$p", payload));
            Execute(
                $"INSERT OR REPLACE INTO sweep_tiles ({SweepTileColumns}, row_check) VALUES ($s, $k, $h, $c)",
                transaction,
                ("$s", sweepId),
                ("$k", tileKey),
                ("$h", tileHash),
                ("$c", RowCheck.Of(sweepId, tileKey, tileHash)));
            transaction.Commit();
        }
    }

    /// <inheritdoc />
    public bool MergeTile(long sweepId, string tileKey, string tileHash, byte[] payload)
    {
        AtlasStoreRules.CheckTile(tileKey, tileHash, payload);
        lock (_gate)
        {
            var sweep = SweepRowUnlocked(sweepId, null) ?? throw NoSweep(sweepId);
            if (sweep.State != "running")
            {
                return false;
            }

            var held = Query($"SELECT {SweepTileColumns}, row_check FROM sweep_tiles WHERE sweep_id = $s AND tile_key = $k", Values, ("$s", sweepId), ("$k", tileKey));
            if (held.Count > 0)
            {
                Verified(held[0], $"sweep {sweepId}, tile {tileKey}", sweepId, tileKey);
                return false;
            }

            using var transaction = _connection.BeginTransaction();
            Execute("INSERT OR IGNORE INTO tiles (tile_hash, payload) VALUES ($h, $p)", transaction, ("$h", tileHash), ("$p", payload));
            Execute(
                $"INSERT INTO sweep_tiles ({SweepTileColumns}, row_check) VALUES ($s, $k, $h, $c)",
                transaction,
                ("$s", sweepId),
                ("$k", tileKey),
                ("$h", tileHash),
                ("$c", RowCheck.Of(sweepId, tileKey, tileHash)));
            transaction.Commit();
            return true;
        }
    }

    /// <inheritdoc />
    public int CommitSweep(long sweepId, string kind, Func<IReadOnlyDictionary<string, string>, (string ContentHash, string Summary)> describe)
    {
        ArgumentNullException.ThrowIfNull(kind);
        ArgumentNullException.ThrowIfNull(describe);
        lock (_gate)
        {
            var sweep = SweepRowUnlocked(sweepId, null) ?? throw NoSweep(sweepId);
            if (sweep.State != "running")
            {
                throw new InvalidOperationException($"sweep {sweepId} is already committed");
            }

            var tiles = AtlasStoreRules.SweepVersionTiles(
                sweep.Parent is { } parent ? VersionTilesUnlocked(sweep.AtlasId, parent) : null,
                sweep.Parent is { } parentVersion ? AtlasStoreRules.SweepOptionsOf(parentVersion, v => VersionLinkUnlocked(sweep.AtlasId, v)) : null,
                sweep.OptionsText,
                SweepTilesUnlocked(sweepId, null));
            var (contentHash, summary) = describe(tiles);
            using var transaction = _connection.BeginTransaction();
            var version = InsertVersionUnlocked(transaction, sweep.AtlasId, sweep.Parent, kind, sweep.OptionsText, contentHash, summary, tiles);
            Execute(
                "UPDATE sweeps SET state = 'committed', version = $v, row_check = $k WHERE sweep_id = $s",
                transaction,
                ("$v", version),
                ("$k", RowCheck.Of(sweepId, sweep.AtlasId, sweep.OptionsText, sweep.Parent, "committed", sweep.Created, version)),
                ("$s", sweepId));
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
        AtlasStoreRules.CheckDerived(atlasId, kind, optionsText, addedTiles, describe);

        lock (_gate)
        {
            if (VersionRowUnlocked(atlasId, parent, null) is null)
            {
                throw new InvalidOperationException($"atlas '{atlasId}' has no version {parent} to derive from");
            }

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
            var version = InsertVersionUnlocked(transaction, atlasId, parent, kind, optionsText, contentHash, summary, tiles);
            if (blob is { } extra)
            {
                var key = AtlasStoreRules.BlobKey(extra.KeyPattern, version);
                Execute(
                    $"INSERT OR REPLACE INTO blobs ({BlobColumns}, row_check) VALUES ($k, $p, $c)",
                    transaction,
                    ("$k", key),
                    ("$p", extra.Payload),
                    ("$c", RowCheck.Of(key, extra.Payload)));
            }

            transaction.Commit();
            return version;
        }
    }

    /// <inheritdoc />
    public IReadOnlyList<AtlasVersionInfo> Versions(string atlasId)
    {
        ArgumentNullException.ThrowIfNull(atlasId);
        lock (_gate)
        {
            var rows = Query($"SELECT {VersionColumns}, row_check FROM versions WHERE atlas_id = $a ORDER BY version", Values, ("$a", atlasId))
                .Select(r => VersionRow.From(Verified(r, $"version {r[1]} of atlas '{atlasId}'", atlasId)))
                .ToList();

            // Versions are numbered 1, 2, … without gaps and the atlas row names the latest, so a version row lost to
            // damage (or renamed into another atlas) is found here instead of making an older version the latest.
            if (AtlasRowUnlocked(atlasId, null) is { } atlas)
            {
                var latest = atlas.LatestVersion ?? 0;
                for (var i = 0; i < rows.Count; i++)
                {
                    if (rows[i].Version != i + 1)
                    {
                        throw Damaged($"atlas '{atlasId}'", $"version {i + 1} is missing");
                    }
                }

                if (rows.Count != latest)
                {
                    throw Damaged($"atlas '{atlasId}'", $"the atlas records {latest} versions, the file holds {rows.Count}");
                }
            }

            return [.. rows.Select(r => r.Info())];
        }
    }

    /// <inheritdoc />
    public IReadOnlyDictionary<string, string> VersionTiles(string atlasId, int version)
    {
        ArgumentNullException.ThrowIfNull(atlasId);
        lock (_gate)
        {
            return VersionTilesUnlocked(atlasId, version);
        }
    }

    /// <inheritdoc />
    public StoredTile Tile(string tileHash)
    {
        ArgumentNullException.ThrowIfNull(tileHash);
        object? payload;
        lock (_gate)
        {
            payload = Query("SELECT payload FROM tiles WHERE tile_hash = $h", r => r.IsDBNull(0) ? null : r.GetValue(0), ("$h", tileHash)).FirstOrDefault();
        }

        if (payload is not null and not byte[])
        {
            throw Damaged($"tile {AtlasStoreRules.Short(tileHash)}", "the stored payload is not a blob");
        }

        return AtlasStoreRules.VerifiedTile(_source, Container, tileHash, (byte[]?)payload);
    }

    /// <inheritdoc />
    public void SaveSweepRequest(long sweepId, string atlasId, byte[] request)
    {
        ArgumentNullException.ThrowIfNull(atlasId);
        ArgumentNullException.ThrowIfNull(request);
        lock (_gate)
        {
            var sweep = SweepRowUnlocked(sweepId, null) ?? throw NoSweep(sweepId);
            if (sweep.AtlasId != atlasId)
            {
                throw new ArgumentException($"sweep {sweepId} belongs to atlas '{sweep.AtlasId}', not '{atlasId}'", nameof(atlasId));
            }

            var created = Now();
            Execute(
                $"INSERT OR IGNORE INTO sweep_requests ({RequestColumns}, row_check) VALUES ($s, $a, $r, $c, $k)",
                ("$s", sweepId),
                ("$a", atlasId),
                ("$r", request),
                ("$c", created),
                ("$k", RowCheck.Of(sweepId, atlasId, request, created)));
        }
    }

    /// <inheritdoc />
    public IReadOnlyList<SweepRequestRecord> UnfinishedSweepRequests()
    {
        lock (_gate)
        {
            var unfinished = new List<SweepRequestRecord>();
            foreach (var raw in Query($"SELECT {RequestColumns}, row_check FROM sweep_requests ORDER BY sweep_id", Values))
            {
                var row = Verified(raw, $"request of sweep {raw[0]}");
                var sweepId = (long)row[0]!;
                var sweep = SweepRowUnlocked(sweepId, null) ?? throw Damaged($"request of sweep {sweepId}", "its sweep is missing");
                if (sweep.State == "running")
                {
                    unfinished.Add(new SweepRequestRecord(sweepId, (string)row[1]!, (byte[])row[2]!));
                }
            }

            return unfinished;
        }
    }

    /// <inheritdoc />
    public SweepRecord? Sweep(long sweepId)
    {
        lock (_gate)
        {
            if (SweepRowUnlocked(sweepId, null) is not { } sweep)
            {
                return null;
            }

            var finished = Query("SELECT COUNT(*) FROM sweep_tiles WHERE sweep_id = $s", r => r.GetInt32(0), ("$s", sweepId))[0];
            return new SweepRecord(sweepId, sweep.AtlasId, sweep.OptionsText, sweep.Parent, sweep.State, sweep.Version, finished);
        }
    }

    /// <inheritdoc />
    public void RecordAttempt(TileAttempt attempt)
    {
        AtlasStoreRules.CheckAttempt(attempt);
        var kept = AtlasStoreRules.Normalized(attempt);
        var started = kept.Started.ToString("O", CultureInfo.InvariantCulture);
        lock (_gate)
        {
            _ = SweepRowUnlocked(kept.SweepId, null) ?? throw NoSweep(kept.SweepId);
            using var transaction = _connection.BeginTransaction();
            var id = Query("SELECT COALESCE(MAX(attempt_id), 0) + 1 FROM tile_attempts", r => r.GetInt64(0), transaction)[0];
            Execute(
                $"INSERT INTO tile_attempts ({AttemptColumns}, row_check) VALUES ($i, $s, $k, $n, $w, $t, $d, $o, $x, $c)",
                transaction,
                ("$i", id),
                ("$s", kept.SweepId),
                ("$k", kept.TileKey),
                ("$n", kept.Attempt),
                ("$w", kept.Worker),
                ("$t", started),
                ("$d", kept.Seconds),
                ("$o", kept.Outcome),
                ("$x", kept.Detail),
                ("$c", RowCheck.Of(id, kept.SweepId, kept.TileKey, kept.Attempt, kept.Worker, started, kept.Seconds, kept.Outcome, kept.Detail)));
            transaction.Commit();
        }
    }

    /// <inheritdoc />
    public IReadOnlyList<TileAttempt> Attempts(long sweepId)
    {
        lock (_gate)
        {
            return Query($"SELECT {AttemptColumns}, row_check FROM tile_attempts WHERE sweep_id = $s ORDER BY attempt_id", Values, ("$s", sweepId))
                .Select(raw =>
                {
                    var row = Verified(raw, $"attempt {raw[0]} of sweep {sweepId}");
                    if (row[1] is not long owner || owner != sweepId)
                    {
                        throw Damaged($"attempt {raw[0]} of sweep {sweepId}", "the row found is another one");
                    }

                    return new TileAttempt(
                        (long)row[1]!,
                        (string)row[2]!,
                        checked((int)(long)row[3]!),
                        (string)row[4]!,
                        DateTimeOffset.Parse((string)row[5]!, CultureInfo.InvariantCulture),
                        (double)row[6]!,
                        (string)row[7]!,
                        (string)row[8]!);
                })
                .ToList();
        }
    }

    /// <summary>SHA-256 (hex) of tile bytes: the tile's content hash.</summary>
    public static string HashOf(byte[] payload) => AtlasStoreRules.HashOf(payload);

    /// <summary>
    /// Closes the file after a checkpoint that moves the write-ahead log into the database and empties it, so a
    /// stopped server leaves one self-contained file (every committed transaction was durable before this either way).
    /// </summary>
    public void Dispose()
    {
        lock (_gate)
        {
            if (_connection.State == System.Data.ConnectionState.Open)
            {
                // Busy readers in other processes make the checkpoint partial, not an error; closing the last
                // connection checkpoints again.
                Query("PRAGMA wal_checkpoint(TRUNCATE)", r => r.GetInt32(0));
            }

            _connection.Dispose();
        }
    }

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

        // SQLite checks no page contents on read: a damaged b-tree page can drop, repeat or misplace rows without an
        // error. The structural check reads every page once (about 0.1 s per 100 MB from the page cache), before
        // anything is written.
        var integrity = Query("PRAGMA integrity_check(1)", r => r.GetString(0))[0];
        if (integrity != "ok")
        {
            // SQLite's report spans lines ("*** in database main ***" first); errors are one line each.
            var report = string.Join("; ", integrity.Split('\n', StringSplitOptions.RemoveEmptyEntries | StringSplitOptions.TrimEntries).Where(l => !l.StartsWith("***", StringComparison.Ordinal)));
            throw new InputException(_source, string.Empty, $"the atlas file is damaged (integrity check: {report})");
        }

        Execute("PRAGMA journal_mode = WAL");
        Execute("PRAGMA synchronous = NORMAL");
        Execute("PRAGMA foreign_keys = ON");

        while (true)
        {
            // BeginTransaction takes the write lock at once (BEGIN IMMEDIATE): the version is read again under it, so
            // two processes opening an old file together migrate it once.
            using var transaction = _connection.BeginTransaction();
            var version = Query("PRAGMA user_version", r => r.GetInt32(0), transaction)[0];
            if (version >= SchemaVersion)
            {
                break;
            }

            try
            {
                Execute(Migrations[version], transaction);
                Backfills[version]?.Invoke(this, transaction);
                Execute($"PRAGMA user_version = {version + 1}", transaction);
                Execute($"PRAGMA application_id = {ApplicationId}", transaction);
                transaction.Commit();
            }
            catch (SqliteException e)
            {
                transaction.Rollback();
                throw new InputException(_source, string.Empty, $"upgrading the atlas schema from version {version} to {version + 1} failed ({Reason(e)}); the file is unchanged");
            }
        }

        // The schema text is part of the file too: a damaged column name or type would otherwise surface as a failing
        // query much later, or as values read under another type.
        var schema = Query("SELECT type, name, tbl_name, sql FROM sqlite_master ORDER BY type, name", SchemaLine);
        var expected = ExpectedSchema.Value;
        if (!schema.SequenceEqual(expected))
        {
            var first = schema.Except(expected).Concat(expected.Except(schema)).FirstOrDefault() ?? "(order)";

            // The schema's SQL text may span lines; the message stays on one.
            first = string.Join(' ', first.Split((char[])['\n', '\r', '\t'], StringSplitOptions.RemoveEmptyEntries | StringSplitOptions.TrimEntries));
            throw new InputException(_source, string.Empty, $"the atlas file is damaged (its schema differs from schema version {SchemaVersion} at: {first})");
        }
    }

    /// <summary>The schema (sqlite_master) every file of this version has: the migrations applied to an empty database.</summary>
    private static List<string> BuildExpectedSchema()
    {
        using var memory = new SqliteConnection("Data Source=:memory:");
        memory.Open();
        foreach (var migration in Migrations)
        {
            using var command = memory.CreateCommand();
            command.CommandText = migration;
            command.ExecuteNonQuery();
        }

        using var query = memory.CreateCommand();
        query.CommandText = "SELECT type, name, tbl_name, sql FROM sqlite_master ORDER BY type, name";
        using var reader = query.ExecuteReader();
        var lines = new List<string>();
        while (reader.Read())
        {
            lines.Add(SchemaLine(reader));
        }

        return lines;
    }

    private static string SchemaLine(SqliteDataReader reader) =>
        $"{reader.GetValue(0)} {reader.GetValue(1)} on {reader.GetValue(2)}: {(reader.IsDBNull(3) ? "(automatic)" : reader.GetValue(3))}";

    /// <summary>Migration 2: the tile-map check and the row check of every row already in the file.</summary>
    private void BackfillChecks(SqliteTransaction transaction)
    {
        var versions = Query("SELECT atlas_id, version FROM versions", r => (r.GetString(0), r.GetInt64(1)), transaction);
        foreach (var (atlasId, version) in versions)
        {
            var map = Query(
                "SELECT tile_key, tile_hash FROM version_tiles WHERE atlas_id = $a AND version = $v",
                r => new KeyValuePair<string, string>(r.GetString(0), r.GetString(1)),
                transaction,
                ("$a", atlasId),
                ("$v", version));
            Execute("UPDATE versions SET tiles_check = $c WHERE atlas_id = $a AND version = $v", transaction, ("$c", RowCheck.OfTiles(map)), ("$a", atlasId), ("$v", version));
        }

        foreach (var (table, columns) in CheckedTables)
        {
            var rows = Query($"SELECT rowid, {columns} FROM {table}", Values, transaction);
            foreach (var row in rows)
            {
                Execute($"UPDATE {table} SET row_check = $c WHERE rowid = $r", transaction, ("$c", RowCheck.Of(row[1..])), ("$r", row[0]));
            }
        }
    }

    private int InsertVersionUnlocked(
        SqliteTransaction transaction, string atlasId, int? parent, string kind, string optionsText, string contentHash, string summary, IReadOnlyDictionary<string, string> tiles)
    {
        var atlas = AtlasRowUnlocked(atlasId, transaction)
            ?? throw new InvalidOperationException($"atlas '{atlasId}' is not in the store: EnsureAtlas comes before the first version");
        var version = Query("SELECT COALESCE(MAX(version), 0) + 1 FROM versions WHERE atlas_id = $a", r => r.GetInt32(0), transaction, ("$a", atlasId))[0];
        var created = Now();
        var tilesCheck = RowCheck.OfTiles(tiles);
        Execute(
            $"INSERT INTO versions ({VersionColumns}, row_check) VALUES ($a, $v, $p, $k, $c, $o, $h, $j, $t, $r)",
            transaction,
            ("$a", atlasId),
            ("$v", version),
            ("$p", parent),
            ("$k", kind),
            ("$c", created),
            ("$o", optionsText),
            ("$h", contentHash),
            ("$j", summary),
            ("$t", tilesCheck),
            ("$r", RowCheck.Of(atlasId, version, parent, kind, created, optionsText, contentHash, summary, tilesCheck)));
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

        Execute(
            "UPDATE atlases SET latest_version = $v, row_check = $c WHERE atlas_id = $a",
            transaction,
            ("$v", version),
            ("$c", RowCheck.Of(atlasId, atlas.FamilyHash, atlas.FamilyJson, version)),
            ("$a", atlasId));
        return version;
    }

    private AtlasRow? AtlasRowUnlocked(string atlasId, SqliteTransaction? transaction)
    {
        var rows = Query($"SELECT {AtlasColumns}, row_check FROM atlases WHERE atlas_id = $a", Values, transaction, ("$a", atlasId));
        if (rows.Count == 0)
        {
            return null;
        }

        var row = Verified(rows[0], $"atlas '{atlasId}'", atlasId);
        return new AtlasRow((string)row[1]!, (string)row[2]!, row[3] is long latest ? checked((int)latest) : null);
    }

    private SweepRow? SweepRowUnlocked(long sweepId, SqliteTransaction? transaction)
    {
        var rows = Query($"SELECT {SweepColumns}, row_check FROM sweeps WHERE sweep_id = $s", Values, transaction, ("$s", sweepId));
        if (rows.Count == 0)
        {
            return null;
        }

        var row = Verified(rows[0], $"sweep {sweepId}", sweepId);
        return new SweepRow((string)row[1]!, (string)row[2]!, Int(row[3]), (string)row[4]!, (string)row[5]!, Int(row[6]));
    }

    private Dictionary<string, string> SweepTilesUnlocked(long sweepId, SqliteTransaction? transaction)
    {
        var tiles = new Dictionary<string, string>(StringComparer.Ordinal);
        foreach (var raw in Query($"SELECT {SweepTileColumns}, row_check FROM sweep_tiles WHERE sweep_id = $s", Values, transaction, ("$s", sweepId)))
        {
            var row = Verified(raw, $"sweep {sweepId}, tile {raw[1]}", sweepId);
            tiles[(string)row[1]!] = (string)row[2]!;
        }

        return tiles;
    }

    private VersionRow? VersionRowUnlocked(string atlasId, int version, SqliteTransaction? transaction)
    {
        var rows = Query($"SELECT {VersionColumns}, row_check FROM versions WHERE atlas_id = $a AND version = $v", Values, transaction, ("$a", atlasId), ("$v", version));
        return rows.Count == 0 ? null : VersionRow.From(Verified(rows[0], $"version {version} of atlas '{atlasId}'", atlasId, version));
    }

    private (string Kind, string Options, int? Parent)? VersionLinkUnlocked(string atlasId, int version) =>
        VersionRowUnlocked(atlasId, version, null) is { } row ? (row.Kind, row.OptionsText, row.Parent) : null;

    private Dictionary<string, string> VersionTilesUnlocked(string atlasId, int version)
    {
        var tiles = Query(
            "SELECT tile_key, tile_hash FROM version_tiles WHERE atlas_id = $a AND version = $v",
            r => (Key: r.GetValue(0) as string, Hash: r.GetValue(1) as string),
            ("$a", atlasId),
            ("$v", version));
        var row = VersionRowUnlocked(atlasId, version, null);
        if (row is null && tiles.Count == 0)
        {
            return new Dictionary<string, string>(StringComparer.Ordinal);
        }

        // The map's rows carry no checks of their own: the version row's tiles_check covers the map as a whole.
        var map = new Dictionary<string, string>(StringComparer.Ordinal);
        foreach (var (key, hash) in tiles)
        {
            if (key is null || hash is null || !map.TryAdd(key, hash))
            {
                throw Damaged($"version {version} of atlas '{atlasId}'", "its tile map is unreadable");
            }
        }

        if (row is null || RowCheck.OfTiles(map) != row.TilesCheck)
        {
            throw Damaged($"version {version} of atlas '{atlasId}'", "its tile map does not match its row check");
        }

        return map;
    }

    /// <summary>
    /// The row's values (the last one its row check), once the check matches the others and the leading values are
    /// the <paramref name="keys"/> looked up (an index pointing at another intact row must not pass for this one).
    /// </summary>
    private object?[] Verified(object?[] row, string location, params object[] keys)
    {
        if (row[^1] is not string check || check != RowCheck.Of(row[..^1]))
        {
            throw Damaged(location, "row check mismatch");
        }

        for (var i = 0; i < keys.Length; i++)
        {
            var same = keys[i] is string text ? row[i] as string == text : row[i] is long number && number == Convert.ToInt64(keys[i], CultureInfo.InvariantCulture);
            if (!same)
            {
                throw Damaged(location, "the row found is another one");
            }
        }

        return row;
    }

    private InputException Damaged(string location, string what) => new(_source, location, $"{what}: the atlas file is damaged");

    private static InvalidOperationException NoSweep(long sweepId) => new($"no sweep {sweepId} in the store");

    private static object?[] Values(SqliteDataReader reader)
    {
        var values = new object?[reader.FieldCount];
        for (var i = 0; i < values.Length; i++)
        {
            values[i] = reader.IsDBNull(i) ? null : reader.GetValue(i);
        }

        return values;
    }

    private static int? Int(object? value) => value is null ? null : checked((int)(long)value);

    private static string Reason(SqliteException e) => e.Message.TrimEnd('.');

    private string Now() => _time.GetUtcNow().ToString("O", CultureInfo.InvariantCulture);

    private void Execute(string sql, params (string Name, object? Value)[] parameters) => Execute(sql, null, parameters);

    private void Execute(string sql, SqliteTransaction? transaction, params (string Name, object? Value)[] parameters)
    {
        using var command = Command(sql, transaction, parameters);
        try
        {
            command.ExecuteNonQuery();
        }
        catch (SqliteException e) when (IsUnreadable(e))
        {
            throw Unreadable(e);
        }
    }

    private List<T> Query<T>(string sql, Func<SqliteDataReader, T> read, params (string Name, object? Value)[] parameters) =>
        Query(sql, read, null, parameters);

    private List<T> Query<T>(string sql, Func<SqliteDataReader, T> read, SqliteTransaction? transaction, params (string Name, object? Value)[] parameters)
    {
        using var command = Command(sql, transaction, parameters);
        try
        {
            using var reader = command.ExecuteReader();
            var rows = new List<T>();
            while (reader.Read())
            {
                rows.Add(read(reader));
            }

            return rows;
        }
        catch (SqliteException e) when (IsUnreadable(e))
        {
            throw Unreadable(e);
        }
    }

    /// <summary>I/O error (10), corrupt page (11), not a database (26): the file, not the caller, is at fault.</summary>
    private static bool IsUnreadable(SqliteException e) => e.SqliteErrorCode is 10 or 11 or 26;

    private InputException Unreadable(SqliteException e) => e.SqliteErrorCode switch
    {
        26 => new InputException(_source, string.Empty, $"not an atlas file, or one damaged beyond reading ({Reason(e)})"),
        10 => new InputException(_source, string.Empty, $"the atlas file cannot be read ({Reason(e)})"),
        _ => new InputException(_source, string.Empty, $"the atlas file is damaged ({Reason(e)})"),
    };

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

    private sealed record AtlasRow(string FamilyHash, string FamilyJson, int? LatestVersion);

    private sealed record SweepRow(string AtlasId, string OptionsText, int? Parent, string State, string Created, int? Version);

    private sealed record VersionRow(int Version, int? Parent, string Kind, string Created, string OptionsText, string ContentHash, string Summary, string TilesCheck)
    {
        public static VersionRow From(object?[] row) =>
            new(checked((int)(long)row[1]!), Int(row[2]), (string)row[3]!, (string)row[4]!, (string)row[5]!, (string)row[6]!, (string)row[7]!, (string)row[8]!);

        public AtlasVersionInfo Info() =>
            new(Version, Parent, Kind, DateTimeOffset.Parse(Created, CultureInfo.InvariantCulture), OptionsText, ContentHash, Summary);
    }
}
