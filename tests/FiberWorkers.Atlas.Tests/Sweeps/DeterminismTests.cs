using FiberWorkers.Atlas.Stores;
using FiberWorkers.Atlas.Sweeps;
using FiberWorkers.Atlas.Tests.Support;
using FiberWorkers.Atlas.Tiles;
using FiberWorkers.Testing;
using Google.Protobuf;

namespace FiberWorkers.Atlas.Tests.Sweeps;

/// <summary>
/// A tile is a pure function of (family, key, seed, options): the same sweep on 1 and 2 threads, at different
/// times, or recomputed in a fresh context gives the same bytes and the same content hash (issue 5; common
/// practice, no source).
/// </summary>
public sealed class DeterminismTests
{
    public static TheoryData<string, int, int, int> Sweeps() => new()
    {
        { "microgrid3", 3, 2, 0 },
        { "cubic", 3, 2, 1 }, // with one level of refinement
        { "reaction-switch", 3, 3, 0 },
    };

    [Theory]
    [MemberData(nameof(Sweeps))]
    public void The_same_sweep_on_one_and_two_threads_has_the_same_content_hash(string example, int tiles, int lines, int refine)
    {
        var family = TestFamilies.Example(example);
        var options = new SweepOptions { Divisions = [tiles, tiles], LinesPerTile = lines, Seed = 41, RefineDepth = refine };
        using var one = new TempAtlas("one");
        using var two = new TempAtlas("two");
        using var storeOne = one.Open();
        using var storeTwo = two.Open();

        var single = new SweepRunner(storeOne).Run(family, options with { MaxDegreeOfParallelism = 1 });
        var parallel = new SweepRunner(storeTwo).Run(family, options with { MaxDegreeOfParallelism = 2 });

        Assert.Equal(single.ContentHash, parallel.ContentHash);
        Assert.Equal(single.Tiles, parallel.Tiles);
        Assert.Equal(single.Labels, parallel.Labels);
        Assert.Equal(
            storeOne.VersionTiles(single.AtlasId, 1).OrderBy(t => t.Key, StringComparer.Ordinal),
            storeTwo.VersionTiles(parallel.AtlasId, 1).OrderBy(t => t.Key, StringComparer.Ordinal));
        if (refine > 0)
        {
            Assert.True(single.Tiles > tiles * tiles, $"refinement added no tiles ({single.Tiles})");
        }
    }

    [Fact]
    public void A_tile_recomputed_in_the_same_or_a_fresh_context_is_byte_identical_to_the_stored_one()
    {
        var family = TestFamilies.Example("two-link-arm");
        var options = new SweepOptions { Divisions = [3, 3], LinesPerTile = 3, Seed = 43, MaxDegreeOfParallelism = 2 };
        using var atlas = new TempAtlas();
        using var store = atlas.Open();
        var summary = new SweepRunner(store).Run(family, options);
        var stored = store.VersionTiles(summary.AtlasId, 1);
        var shared = SweepContexts.For(family, options);
        var fresh = SweepContext.Create(family, options with { MaxDegreeOfParallelism = 2 });

        foreach (var (text, hash) in stored)
        {
            var key = TileKey.Parse(text);
            var first = TileComputer.Compute(shared, key).Result.ToByteArray();
            var again = TileComputer.Compute(shared, key).Result.ToByteArray();
            var elsewhere = TileComputer.Compute(fresh, key).Result.ToByteArray();
            Assert.Equal(first, again);
            Assert.Equal(first, elsewhere);
            Assert.Equal(store.Tile(hash).Payload, first);
            Assert.Equal(hash, SqliteAtlasStore.HashOf(first));
        }
    }

    [Fact]
    public void Tiles_computed_concurrently_equal_tiles_computed_one_by_one()
    {
        var options = new SweepOptions { Divisions = [4, 4], LinesPerTile = 2, Seed = 47 };
        var context = SweepContexts.Example("reaction-switch", options);
        var keys = Enumerable.Range(0, 16).Select(i => new TileKey(0, [i / 4, i % 4])).ToArray();
        var sequential = keys.Select(k => TileComputer.Compute(context, k).Result.ToByteArray()).ToArray();
        var concurrent = new byte[keys.Length][];

        Parallel.For(0, keys.Length, new ParallelOptions { MaxDegreeOfParallelism = 2 }, i => concurrent[i] = TileComputer.Compute(context, keys[i]).Result.ToByteArray());

        for (var i = 0; i < keys.Length; i++)
        {
            Assert.Equal(sequential[i], concurrent[i]);
        }
    }

    [Fact]
    public void The_content_hash_ignores_the_time_of_the_sweep()
    {
        var family = TestFamilies.Example("cubic");
        var options = new SweepOptions { Divisions = [2, 2], LinesPerTile = 2, Seed = 53, MaxDegreeOfParallelism = 1 };
        using var early = new TempAtlas("early");
        using var late = new TempAtlas("late");
        using var earlyStore = SqliteAtlasStore.Open(early.Path, new FixedTime(new DateTimeOffset(2031, 1, 2, 3, 4, 5, TimeSpan.Zero)));
        using var lateStore = SqliteAtlasStore.Open(late.Path, new FixedTime(new DateTimeOffset(2042, 6, 7, 8, 9, 10, TimeSpan.Zero)));

        var first = new SweepRunner(earlyStore).Run(family, options);
        var second = new SweepRunner(lateStore).Run(family, options);

        Assert.Equal(first.ContentHash, second.ContentHash);
        Assert.Equal(2031, earlyStore.Versions(first.AtlasId)[0].Created.Year);
        Assert.Equal(2042, lateStore.Versions(second.AtlasId)[0].Created.Year);
    }

    [Fact]
    public void Another_seed_gives_other_lines_and_another_content_hash()
    {
        // The guard against a hash that ignores the content: the seed changes every line.
        var family = TestFamilies.Example("cubic");
        var options = new SweepOptions { Divisions = [2, 2], LinesPerTile = 2, Seed = 59, MaxDegreeOfParallelism = 1 };
        using var a = new TempAtlas("a");
        using var b = new TempAtlas("b");
        using var storeA = a.Open();
        using var storeB = b.Open();

        var first = new SweepRunner(storeA).Run(family, options);
        var second = new SweepRunner(storeB).Run(family, options with { Seed = 60 });

        Assert.NotEqual(first.ContentHash, second.ContentHash);
    }

    private sealed class FixedTime(DateTimeOffset now) : TimeProvider
    {
        public override DateTimeOffset GetUtcNow() => now;
    }
}
