using System.Collections.Concurrent;
using FiberWorkers.Algebra.Families;
using FiberWorkers.Atlas.Resolve;
using FiberWorkers.Atlas.Stores;
using FiberWorkers.Atlas.Sweeps;
using FiberWorkers.Atlas.Tiles;
using FiberWorkers.Cluster.Contracts;
using FiberWorkers.Contracts.V1;
using FiberWorkers.Solving.Fibers;
using FiberWorkers.Solving.StartFibers;
using Google.Protobuf;
using Grpc.Core;

namespace FiberWorkers.Cluster.Coordination;

/// <summary>One committed atlas version as the coordinator routes and shards it (immutable, cached).</summary>
public sealed class AtlasView
{
    internal AtlasView(string atlasId, FamilyDefinition family, AtlasVersionInfo version, IReadOnlyDictionary<string, string> tiles)
    {
        AtlasId = atlasId;
        Family = family;
        Version = version;
        Tiles = tiles;
        var grid = tiles.Keys.Select(k => (Text: k, Key: TryParse(k))).ToList();
        Extra = [.. grid.Where(t => t.Key is null).Select(t => t.Text).Order(StringComparer.Ordinal)];
        var roots = grid.Where(t => t.Key is { Level: 0 }).Select(t => t.Key!.Value).ToList();
        var m = family.Parameters.Count;
        Divisions = [.. Enumerable.Range(0, m).Select(k => roots.Count == 0 ? 1 : roots.Max(r => r.Coordinates[k]) + 1)];
        ByRoot = grid.Where(t => t.Key is not null).ToLookup(t => t.Key!.Value.Root().ToString(), t => t.Text, StringComparer.Ordinal);
    }

    public string AtlasId { get; }

    public FamilyDefinition Family { get; }

    public AtlasVersionInfo Version { get; }

    /// <summary>Tile key → tile hash.</summary>
    public IReadOnlyDictionary<string, string> Tiles { get; }

    /// <summary>Level-0 tiles per axis (from the level-0 keys present).</summary>
    public IReadOnlyList<int> Divisions { get; }

    /// <summary>Grid tiles (any level) by the level-0 tile they lie in.</summary>
    public ILookup<string, string> ByRoot { get; }

    /// <summary>Tiles that are not on the grid (e.g. samples learned from queries), spanning the whole box.</summary>
    public IReadOnlyList<string> Extra { get; }

    private static TileKey? TryParse(string key)
    {
        try
        {
            return TileKey.Parse(key);
        }
        catch (FormatException)
        {
            return null;
        }
    }
}

/// <summary>
/// What the coordinator serves from its store besides sweeps: version lists, views for routing, tile shards with
/// their halo, and sweep setups (family and start fibers) for workers. Thread-safe; committed versions are immutable,
/// so views and start fibers are cached.
/// </summary>
public sealed class AtlasCatalog
{
    private readonly ISweepLedger _store;
    private readonly ConcurrentDictionary<(string Atlas, int Version), Lazy<AtlasView>> _views = new();
    private readonly ConcurrentDictionary<string, FamilyDefinition> _families = new(StringComparer.Ordinal);
    private readonly ConcurrentDictionary<(string Atlas, int Version), Lazy<byte[]>> _starts = new();
    private readonly ConcurrentDictionary<string, (int Version, DateTimeOffset Read)> _latest = new(StringComparer.Ordinal);
    private readonly ConcurrentDictionary<string, byte> _refreshing = new(StringComparer.Ordinal);

    public AtlasCatalog(ISweepLedger store)
    {
        ArgumentNullException.ThrowIfNull(store);
        _store = store;
    }

    /// <summary>Limits the families read back from the store are parsed under (those the coordinator accepts).</summary>
    public FamilyLimits FamilyLimits { get; init; } = FamilyLimits.Default;

    /// <summary>How long "latest version" answers are reused before the store is asked again.</summary>
    public TimeSpan LatestCache { get; init; } = TimeSpan.FromSeconds(1);

    /// <summary>Forgets the cached latest version of an atlas (after a commit).</summary>
    public void Committed(string atlasId) => _latest.TryRemove(atlasId, out _);

    public IReadOnlyList<AtlasVersion> Versions(string atlasId)
    {
        var atlases = string.IsNullOrEmpty(atlasId) ? _store.Atlases() : [atlasId];
        var list = new List<AtlasVersion>();
        foreach (var atlas in atlases)
        {
            var family = Family(atlas);
            var versions = _store.Versions(atlas);
            foreach (var info in versions)
            {
                var message = Conversions.ToMessage(atlas, family.Name, info);
                if (!string.IsNullOrEmpty(atlasId))
                {
                    message.FamilyJson = JsonFormatter.Default.Format(family.Message);
                    message.Divisions.Add(View(atlas, info.Version).Divisions);
                }

                list.Add(message);
            }
        }

        return list;
    }

    /// <summary>A committed version (0: the latest); NotFound when the atlas or version does not exist.</summary>
    public AtlasView View(string atlasId, int version)
    {
        var number = version > 0 ? version : Latest(atlasId);
        var view = _views.GetOrAdd((atlasId, number), key => new Lazy<AtlasView>(() => Load(key.Atlas, key.Version))).Value;
        return view;
    }

    /// <summary>The shard of a level-0 tile: its tiles and the halo of its neighbours.</summary>
    public TileShard Shard(AtlasView view, TileKey root)
    {
        ArgumentNullException.ThrowIfNull(view);
        if (!root.FitsIn(view.Divisions))
        {
            throw new RpcException(new Status(StatusCode.InvalidArgument, $"tile_key: {root} lies outside the {string.Join('x', view.Divisions)} grid of atlas {view.AtlasId}"));
        }

        var shard = new TileShard
        {
            AtlasId = view.AtlasId,
            Version = view.Version.Version,
            TileKey = root.ToString(),
            FamilyJson = JsonFormatter.Default.Format(view.Family.Message),
            FamilyHash = view.Family.ContentHash,
            StartFiber = ByteString.CopyFrom(StartFiberBytes(view)),
            ContentHash = view.Version.ContentHash,
        };
        shard.Divisions.Add(view.Divisions);
        var m = root.Coordinates.Length;
        foreach (var neighbour in Neighbours(root, view.Divisions))
        {
            foreach (var key in view.ByRoot[neighbour.ToString()])
            {
                shard.Tiles.Add(Decode(view.Tiles[key], key));
            }
        }

        // Tiles off the grid (learned samples) span the box: keep their samples inside the halo only.
        var low = new double[m];
        var high = new double[m];
        for (var k = 0; k < m; k++)
        {
            var width = view.Family.Parameters[k].Width / view.Divisions[k];
            low[k] = view.Family.Parameters[k].Low + ((root.Coordinates[k] - 1) * width);
            high[k] = view.Family.Parameters[k].Low + ((root.Coordinates[k] + 2) * width);
        }

        foreach (var key in view.Extra)
        {
            var tile = Decode(view.Tiles[key], key);
            var inside = tile.Samples.Where(s => Enumerable.Range(0, m).All(k => s.Point[k] >= low[k] && s.Point[k] <= high[k])).ToList();
            tile.Samples.Clear();
            tile.Samples.Add(inside);
            tile.Crossings.Clear();
            shard.Tiles.Add(tile);
        }

        return shard;
    }

    /// <summary>The family and start fibers a worker needs for tiles of a sweep; FailedPrecondition before they exist.</summary>
    public SweepSetup Setup(string familyHash, SweepSettings settings)
    {
        ArgumentNullException.ThrowIfNull(settings);
        var atlasId = $"a{familyHash[..Math.Min(15, familyHash.Length)]}";

        // Tenants' atlases of the family live under their namespaces ("acme/a..."); any of them holds the family.
        if (_store.Family(atlasId) is null)
        {
            atlasId = _store.Atlases().FirstOrDefault(a => a.EndsWith(Security.TenantScope.Separator + atlasId, StringComparison.Ordinal)) ?? atlasId;
        }

        var family = _store.Family(atlasId) is { } known && known.FamilyHash == familyHash
            ? Family(atlasId)
            : throw new RpcException(new Status(StatusCode.NotFound, $"family_hash: no atlas holds family {familyHash}"));
        SweepOptions options;
        try
        {
            options = Conversions.ToOptions(settings, family.Parameters.Count);
        }
        catch (ArgumentException e)
        {
            throw new RpcException(new Status(StatusCode.InvalidArgument, e.Message));
        }

        var setup = new SweepSetup { FamilyJson = JsonFormatter.Default.Format(family.Message), FamilyHash = familyHash, Settings = settings };
        ByteString Blob(string kind) => _store.GetBlob(SweepRunner.StartFiberKey(family, options, kind)) is { } bytes
            ? ByteString.CopyFrom(bytes)
            : throw new RpcException(new Status(StatusCode.FailedPrecondition, $"the {kind} start fiber of this sweep is not computed yet"));
        setup.FamilyStart = Blob("family");
        setup.FoldStart = Blob("folds");
        setup.PassageStart = Blob("passages");
        return setup;
    }

    /// <summary>The level-0 tiles whose coordinates differ from <paramref name="root"/>'s by at most one on every axis.</summary>
    internal static IEnumerable<TileKey> Neighbours(TileKey root, IReadOnlyList<int> divisions)
    {
        var m = root.Coordinates.Length;
        var offsets = new int[m];
        var total = (int)Math.Pow(3, m);
        for (var code = 0; code < total; code++)
        {
            var rest = code;
            var coordinates = new int[m];
            var inside = true;
            for (var k = 0; k < m; k++)
            {
                offsets[k] = (rest % 3) - 1;
                rest /= 3;
                coordinates[k] = root.Coordinates[k] + offsets[k];
                inside &= coordinates[k] >= 0 && coordinates[k] < divisions[k];
            }

            if (inside)
            {
                yield return new TileKey(0, coordinates);
            }
        }
    }

    private FamilyDefinition Family(string atlasId)
    {
        if (_families.TryGetValue(atlasId, out var family))
        {
            return family;
        }

        var (_, json) = _store.Family(atlasId) ?? throw new RpcException(new Status(StatusCode.NotFound, $"atlas_id: no atlas '{atlasId}' in the store"));
        family = FamilyReader.Parse(json, $"atlas {atlasId} (family)", FamilyLimits);
        return _families.GetOrAdd(atlasId, family);
    }

    private int Latest(string atlasId)
    {
        var known = _latest.TryGetValue(atlasId, out var cached);
        if (known && DateTimeOffset.UtcNow - cached.Read < LatestCache)
        {
            return cached.Version;
        }

        // When the cached answer expires one caller reads the store and the others keep the answer meanwhile: a burst
        // of asks must not queue on the store (behind a sweep's writes) all at once. After a commit nothing is cached.
        if (known && !_refreshing.TryAdd(atlasId, 0))
        {
            return cached.Version;
        }

        try
        {
            _ = Family(atlasId);
            var versions = _store.Versions(atlasId);
            if (versions.Count == 0)
            {
                throw new RpcException(new Status(StatusCode.NotFound, $"atlas_id: atlas '{atlasId}' has no committed version yet"));
            }

            _latest[atlasId] = (versions[^1].Version, DateTimeOffset.UtcNow);
            return versions[^1].Version;
        }
        finally
        {
            if (known)
            {
                _refreshing.TryRemove(atlasId, out _);
            }
        }
    }

    private AtlasView Load(string atlasId, int version)
    {
        var family = Family(atlasId);
        var info = _store.Versions(atlasId).FirstOrDefault(v => v.Version == version)
            ?? throw new RpcException(new Status(StatusCode.NotFound, $"version: atlas '{atlasId}' has no version {version}"));
        return new AtlasView(atlasId, family, info, _store.VersionTiles(atlasId, version));
    }

    private byte[] StartFiberBytes(AtlasView view) =>
        _starts.GetOrAdd((view.AtlasId, view.Version.Version), _ => new Lazy<byte[]>(() =>
        {
            var snapshot = AtlasSnapshot.FromTiles(view.AtlasId, view.Family, view.Version, []);
            return StartFiberFile.Serialize(AtlasResolver.StartFiber(_store, snapshot, SolveOptions.Default with { MaxDegreeOfParallelism = 1 }));
        })).Value;

    private TileResult Decode(string hash, string key)
    {
        var stored = _store.Tile(hash);
        try
        {
            return TileResult.Parser.ParseFrom(stored.Payload);
        }
        catch (InvalidProtocolBufferException e)
        {
            throw new RpcException(new Status(StatusCode.DataLoss, $"tile {key} of the store cannot be decoded ({e.Message})"));
        }
    }
}
