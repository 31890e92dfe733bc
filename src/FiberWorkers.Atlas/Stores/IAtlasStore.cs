namespace FiberWorkers.Atlas.Stores;

/// <summary>
/// Durable storage of atlases: content-addressed tile results, sweeps in progress, immutable versions that map
/// tile keys to tile contents, start fibers and models. Implementations are safe for one writer and many readers.
/// </summary>
public interface IAtlasStore : IDisposable
{
    /// <summary>Records the atlas's family, or checks that it is the same one (by content hash).</summary>
    void EnsureAtlas(string atlasId, string familyHash, string familyJson);

    /// <summary>The family JSON of an atlas, or null when the atlas does not exist.</summary>
    (string FamilyHash, string FamilyJson)? Family(string atlasId);

    /// <summary>All atlas ids in the store.</summary>
    IReadOnlyList<string> Atlases();

    /// <summary>A stored blob (start fibers, models) by key, or null.</summary>
    byte[]? GetBlob(string key);

    /// <summary>Stores a blob under a key (first writer wins; later writes of the same key are ignored).</summary>
    void PutBlob(string key, byte[] payload);

    /// <summary>The running sweep with these options on this atlas, or a new one; returns its id and finished tiles.</summary>
    (long SweepId, IReadOnlyDictionary<string, string> Finished) BeginOrResumeSweep(string atlasId, string optionsText, int? parent);

    /// <summary>Stores a tile result (once per content hash) and records it in the sweep, in one transaction.</summary>
    void PutTile(long sweepId, string tileKey, string tileHash, byte[] payload);

    /// <summary>
    /// Commits the sweep as a new version: the sweep's tiles plus the parent's untouched ones (its grid tiles only when
    /// they came from the same sweep options, derived tiles such as learned samples always); returns the version.
    /// </summary>
    int CommitSweep(long sweepId, string kind, Func<IReadOnlyDictionary<string, string>, (string ContentHash, string Summary)> describe);

    /// <summary>
    /// Commits a version derived from <paramref name="parent"/> without a sweep: the parent's tiles plus
    /// <paramref name="addedTiles"/> (stored by content hash), and optionally a blob stored under a key that names the
    /// new version (use <c>{version}</c> in the key). Returns the new version.
    /// </summary>
    int CommitDerived(
        string atlasId,
        int parent,
        string kind,
        string optionsText,
        IReadOnlyList<(string TileKey, string TileHash, byte[] Payload)> addedTiles,
        (string KeyPattern, byte[] Payload)? blob,
        Func<IReadOnlyDictionary<string, string>, (string ContentHash, string Summary)> describe);

    /// <summary>Versions of an atlas, oldest first.</summary>
    IReadOnlyList<AtlasVersionInfo> Versions(string atlasId);

    /// <summary>The tile key → tile hash map of a version.</summary>
    IReadOnlyDictionary<string, string> VersionTiles(string atlasId, int version);

    /// <summary>A tile by content hash; the payload's hash is checked.</summary>
    StoredTile Tile(string tileHash);
}
