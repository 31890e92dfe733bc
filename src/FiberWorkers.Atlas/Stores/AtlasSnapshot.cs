using FiberWorkers.Algebra.Families;
using FiberWorkers.Contracts.V1;

namespace FiberWorkers.Atlas.Stores;

/// <summary>One version of an atlas, loaded: its family, tiles, and all samples and crossings (checksums verified).</summary>
public sealed class AtlasSnapshot
{
    private AtlasSnapshot(string atlasId, FamilyDefinition family, AtlasVersionInfo version, IReadOnlyList<TileResult> tiles)
    {
        AtlasId = atlasId;
        Family = family;
        Version = version;
        Tiles = tiles;
        Samples = [.. tiles.SelectMany(t => t.Samples.Select(s => (Tile: t.TileKey, Sample: s)))];
        Crossings = [.. tiles.SelectMany(t => t.Crossings.Select(c => (Tile: t.TileKey, Crossing: c)))];
    }

    /// <summary>The atlas id.</summary>
    public string AtlasId { get; }

    /// <summary>The family the atlas maps.</summary>
    public FamilyDefinition Family { get; }

    /// <summary>The version loaded.</summary>
    public AtlasVersionInfo Version { get; }

    /// <summary>The version's tiles, in key order.</summary>
    public IReadOnlyList<TileResult> Tiles { get; }

    /// <summary>Every sample with its tile key.</summary>
    public IReadOnlyList<(string Tile, Sample Sample)> Samples { get; }

    /// <summary>Every crossing with its tile key.</summary>
    public IReadOnlyList<(string Tile, Crossing Crossing)> Crossings { get; }

    /// <summary>
    /// A snapshot of part of a version: the given tiles only (a cluster worker's shard: one tile and its halo). The
    /// tiles must belong to <paramref name="family"/>.
    /// </summary>
    public static AtlasSnapshot FromTiles(string atlasId, FamilyDefinition family, AtlasVersionInfo version, IReadOnlyList<TileResult> tiles)
    {
        ArgumentNullException.ThrowIfNull(family);
        ArgumentNullException.ThrowIfNull(version);
        ArgumentNullException.ThrowIfNull(tiles);
        if (tiles.FirstOrDefault(t => t.FamilyHash != family.ContentHash) is { } foreign)
        {
            throw new ArgumentException($"tile {foreign.TileKey} belongs to family {foreign.FamilyHash}, not {family.ContentHash}", nameof(tiles));
        }

        return new AtlasSnapshot(atlasId, family, version, [.. tiles.OrderBy(t => t.TileKey, StringComparer.Ordinal)]);
    }

    /// <summary>
    /// Loads a version (the latest when <paramref name="version"/> is null) of the atlas in a store; the store must
    /// hold exactly one atlas unless <paramref name="atlasId"/> names it.
    /// </summary>
    public static AtlasSnapshot Load(IAtlasStore store, string source, int? version = null, string? atlasId = null)
    {
        ArgumentNullException.ThrowIfNull(store);
        var atlases = store.Atlases();
        if (atlasId is null)
        {
            if (atlases.Count == 0)
            {
                throw new InputException(source, string.Empty, "the atlas file is empty: run 'fiber sweep' first");
            }

            if (atlases.Count > 1)
            {
                throw new InputException(source, string.Empty, $"the file holds {atlases.Count} atlases ({string.Join(", ", atlases)}); name one with --atlas-id");
            }

            atlasId = atlases[0];
        }
        else if (!atlases.Contains(atlasId))
        {
            throw new InputException(source, "--atlas-id", $"no atlas '{atlasId}' in the file{NameSuggester.Hint(atlasId, atlases)}");
        }

        var (_, familyJson) = store.Family(atlasId)!.Value;
        var family = FamilyReader.Parse(familyJson, $"{source} (family)");
        var versions = store.Versions(atlasId);
        if (versions.Count == 0)
        {
            throw new InputException(source, string.Empty, "the atlas has no committed version yet (an interrupted sweep can be resumed)");
        }

        var info = version is null ? versions[^1] : versions.FirstOrDefault(v => v.Version == version)
            ?? throw new InputException(source, "--version", $"no version {version}; versions: {string.Join(", ", versions.Select(v => v.Version))}");
        var tiles = store.VersionTiles(atlasId, info.Version)
            .OrderBy(t => t.Key, StringComparer.Ordinal)
            .Select(t => Decode(store.Tile(t.Value).Payload, source, t.Key))
            .ToArray();
        return new AtlasSnapshot(atlasId, family, info, tiles);
    }

    private static TileResult Decode(byte[] payload, string source, string key)
    {
        try
        {
            return TileResult.Parser.ParseFrom(payload);
        }
        catch (Google.Protobuf.InvalidProtocolBufferException e)
        {
            throw new InputException(source, $"tile {key}", $"cannot be decoded ({e.Message}): the file is damaged");
        }
    }
}
