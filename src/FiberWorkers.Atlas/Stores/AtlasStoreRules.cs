using System.Globalization;
using System.Security.Cryptography;
using FiberWorkers.Algebra.Families;

namespace FiberWorkers.Atlas.Stores;

/// <summary>
/// The rules every atlas store follows, whatever holds the rows: content hashes of tiles, which parent tiles a sweep's
/// version shares, how a stored tile is checked on read, and what a tile attempt may say. The SQLite and PostgreSQL
/// stores both call these, so their answers cannot drift apart.
/// </summary>
public static class AtlasStoreRules
{
    /// <summary>The outcomes a <see cref="TileAttempt"/> may record.</summary>
    public static IReadOnlyList<string> AttemptOutcomes { get; } = ["merged", "duplicate", "failed", "timeout", "busy", "lost", "returned"];

    /// <summary>SHA-256 (lower-case hex) of tile bytes: the tile's content hash.</summary>
    public static string HashOf(byte[] payload)
    {
        ArgumentNullException.ThrowIfNull(payload);
        return Convert.ToHexStringLower(SHA256.HashData(payload));
    }

    /// <summary>The argument checks every store's CommitDerived makes before it touches the database.</summary>
    public static void CheckDerived(
        string atlasId,
        string kind,
        string optionsText,
        IReadOnlyList<(string TileKey, string TileHash, byte[] Payload)> addedTiles,
        Delegate describe)
    {
        ArgumentNullException.ThrowIfNull(atlasId);
        ArgumentNullException.ThrowIfNull(kind);
        ArgumentNullException.ThrowIfNull(optionsText);
        ArgumentNullException.ThrowIfNull(addedTiles);
        ArgumentNullException.ThrowIfNull(describe);
        foreach (var (key, hash, payload) in addedTiles)
        {
            CheckTile(key, hash, payload);
        }
    }

    /// <summary>
    /// Refuses a tile whose hash is not the hash of its payload: tiles are stored once per hash and the first writer
    /// wins, so one wrong pair written would shadow the right payload for good.
    /// </summary>
    public static void CheckTile(string tileKey, string tileHash, byte[] payload)
    {
        ArgumentException.ThrowIfNullOrEmpty(tileKey);
        ArgumentException.ThrowIfNullOrEmpty(tileHash);
        ArgumentNullException.ThrowIfNull(payload);
        var actual = HashOf(payload);
        if (actual != tileHash)
        {
            throw new ArgumentException($"tile {tileKey}: the hash given ({Short(tileHash)}) is not the payload's SHA-256 ({Short(actual)})", nameof(tileHash));
        }
    }

    /// <summary>
    /// A tile read back from a store, its payload checked against its hash: a missing or damaged payload is an
    /// <see cref="InputException"/> naming <paramref name="source"/>, never a tile with other content.
    /// </summary>
    /// <param name="source">The store as named in errors (a file name, or the server and database).</param>
    /// <param name="container">What is damaged when the check fails, e.g. <c>the atlas file</c>.</param>
    /// <param name="tileHash">The hash the tile was asked for.</param>
    /// <param name="payload">The stored payload, or null when no row holds that hash.</param>
    public static StoredTile VerifiedTile(string source, string container, string tileHash, byte[]? payload)
    {
        ArgumentNullException.ThrowIfNull(tileHash);
        if (payload is null)
        {
            throw new InputException(source, $"tile {Short(tileHash)}", $"missing from {container} (the {Noun(container)} is damaged)");
        }

        var actual = HashOf(payload);
        if (actual != tileHash)
        {
            throw new InputException(source, $"tile {Short(tileHash)}", $"checksum mismatch (stored content hashes to {Short(actual)}): the {Noun(container)} is damaged");
        }

        return new StoredTile(string.Empty, tileHash, payload);
    }

    /// <summary>True for the keys of grid tiles (<c>L2:5,3</c>), false for derived tiles such as <c>learned:v4</c>.</summary>
    public static bool IsGridKey(string tileKey)
    {
        ArgumentNullException.ThrowIfNull(tileKey);
        return tileKey.Length > 1 && tileKey[0] == 'L' && char.IsAsciiDigit(tileKey[1]);
    }

    /// <summary>
    /// The tiles of the version a sweep commits: the parent's tiles it did not recompute plus its own. Grid tiles are
    /// taken from the parent only when the parent's grid came from the same sweep options; derived tiles always.
    /// </summary>
    /// <param name="parentTiles">The parent version's tile map, or null without a parent.</param>
    /// <param name="parentSweepOptions">The options of the sweep behind the parent (see <see cref="SweepOptionsOf"/>).</param>
    /// <param name="sweepOptions">This sweep's canonical options text.</param>
    /// <param name="sweepTiles">The tiles this sweep stored.</param>
    public static SortedDictionary<string, string> SweepVersionTiles(
        IReadOnlyDictionary<string, string>? parentTiles, string? parentSweepOptions, string sweepOptions, IEnumerable<KeyValuePair<string, string>> sweepTiles)
    {
        ArgumentNullException.ThrowIfNull(sweepTiles);

        // Grid tiles (keys L<level>:...) are shared with the parent only when its grid came from the same sweep
        // options: under other options a key names another region (other divisions) or other content (every tile
        // records its options), and the version's content hash is taken under this sweep's options. Tiles of
        // derived versions (learned samples) are shared either way.
        var tiles = new SortedDictionary<string, string>(StringComparer.Ordinal);
        if (parentTiles is not null)
        {
            var sameGrid = parentSweepOptions == sweepOptions;
            foreach (var (key, hash) in parentTiles)
            {
                if (sameGrid || !IsGridKey(key))
                {
                    tiles[key] = hash;
                }
            }
        }

        foreach (var (key, hash) in sweepTiles)
        {
            tiles[key] = hash;
        }

        return tiles;
    }

    /// <summary>
    /// The options of the sweep behind a version: its own when it is a sweep version, else its nearest sweep
    /// ancestor's (derived versions carry their own option text). Null when the chain ends without a sweep.
    /// </summary>
    /// <param name="version">The version to start from.</param>
    /// <param name="lookup">Reads one version's kind, options text and parent, or null when there is no such version.</param>
    public static string? SweepOptionsOf(int version, Func<int, (string Kind, string Options, int? Parent)?> lookup)
    {
        ArgumentNullException.ThrowIfNull(lookup);
        int? current = version;
        while (current is { } number)
        {
            if (lookup(number) is not { } row)
            {
                return null;
            }

            if (row.Kind == "sweep")
            {
                return row.Options;
            }

            // Parents are always older versions; anything else is a damaged chain, and following it could loop.
            current = row.Parent < number ? row.Parent : null;
        }

        return null;
    }

    /// <summary>The key of a derived version's blob: <c>{version}</c> in the pattern replaced by the version number.</summary>
    public static string BlobKey(string keyPattern, int version)
    {
        ArgumentNullException.ThrowIfNull(keyPattern);
        return keyPattern.Replace("{version}", version.ToString(CultureInfo.InvariantCulture), StringComparison.Ordinal);
    }

    /// <summary>Refuses an attempt record that no store could keep faithfully: unknown outcome, attempt below 1, bad duration.</summary>
    public static void CheckAttempt(TileAttempt attempt)
    {
        ArgumentNullException.ThrowIfNull(attempt);
        ArgumentException.ThrowIfNullOrEmpty(attempt.TileKey, nameof(attempt));
        ArgumentNullException.ThrowIfNull(attempt.Worker, nameof(attempt));
        ArgumentNullException.ThrowIfNull(attempt.Detail, nameof(attempt));
        if (!AttemptOutcomes.Contains(attempt.Outcome))
        {
            throw new ArgumentException(
                $"attempt {attempt.Attempt} at tile {attempt.TileKey} of sweep {attempt.SweepId}: outcome '{attempt.Outcome}' is not one of {string.Join(", ", AttemptOutcomes)}",
                nameof(attempt));
        }

        if (attempt.Attempt < 1)
        {
            throw new ArgumentException($"attempt at tile {attempt.TileKey} of sweep {attempt.SweepId}: attempt number {attempt.Attempt} is below 1", nameof(attempt));
        }

        if (!double.IsFinite(attempt.Seconds) || attempt.Seconds < 0)
        {
            throw new ArgumentException(
                $"attempt {attempt.Attempt} at tile {attempt.TileKey} of sweep {attempt.SweepId}: duration {attempt.Seconds.ToString(CultureInfo.InvariantCulture)} s is not a finite non-negative number",
                nameof(attempt));
        }
    }

    /// <summary>
    /// An attempt as every store returns it: the start time in UTC, to the microsecond (PostgreSQL's resolution), so a
    /// round trip gives the same record in both stores.
    /// </summary>
    public static TileAttempt Normalized(TileAttempt attempt)
    {
        ArgumentNullException.ThrowIfNull(attempt);
        var utc = attempt.Started.UtcTicks;
        return attempt with { Started = new DateTimeOffset(utc - (utc % TimeSpan.TicksPerMicrosecond), TimeSpan.Zero) };
    }

    /// <summary>The first 12 characters of a hash, as errors quote it.</summary>
    internal static string Short(string hash) => hash[..Math.Min(12, hash.Length)];

    private static string Noun(string container) => container.StartsWith("the ", StringComparison.Ordinal) ? container[4..] : container;
}
