using FiberWorkers.Algebra.Families;
using FiberWorkers.Atlas.Stores;
using FiberWorkers.Atlas.Sweeps;
using FiberWorkers.Atlas.Tests.Support;
using FiberWorkers.Atlas.Tiles;
using FiberWorkers.Contracts.V1;
using FiberWorkers.Testing;

namespace FiberWorkers.Atlas.Tests.Sweeps;

/// <summary>The sweep runner's plan: level-0 grid, refinement where the boundary is, the budget, and its summary.</summary>
public sealed class SweepRunnerTests
{
    private static readonly FamilyDefinition Cubic = TestFamilies.Example("cubic");

    [Fact]
    public void Refinement_splits_exactly_the_tiles_that_hold_a_fold()
    {
        using var atlas = new TempAtlas();
        using var store = atlas.Open();
        var summary = new SweepRunner(store).Run(Cubic, new SweepOptions { Divisions = [3, 3], LinesPerTile = 2, Seed = 71, RefineDepth = 2, MaxDegreeOfParallelism = 2 });
        var tiles = AtlasSnapshot.Load(store, atlas.Path).Tiles.ToDictionary(t => TileKey.Parse(t.TileKey));

        for (var level = 0; level < 2; level++)
        {
            var planned = tiles.Keys.Where(k => k.Level == level + 1).Order().ToList();
            var expected = tiles
                .Where(t => t.Key.Level == level && t.Value.Crossings.Any(c => c.Kind is CrossingKind.Fold or CrossingKind.FoldAtInfinity))
                .SelectMany(t => t.Key.Children())
                .Order()
                .ToList();
            Assert.Equal(expected, planned);
            Assert.NotEmpty(planned);
        }

        Assert.Equal(9, tiles.Keys.Count(k => k.Level == 0));
        Assert.Equal(tiles.Count, summary.Tiles);

        // Refined tiles are half the size of their parents and still labeled by the discriminant's sign
        // (x³ + b·x + c: 3 real roots iff 4b³ + 27c² < 0; Cox, Little & O'Shea).
        foreach (var (key, tile) in tiles.Where(t => t.Key.Level == 2))
        {
            Assert.All(tile.Samples, s => Assert.Equal((4 * Math.Pow(s.Point[0], 3)) + (27 * s.Point[1] * s.Point[1]) < 0 ? 3 : 1, s.Label));
        }
    }

    [Fact]
    public void A_sample_budget_caps_refinement_deterministically()
    {
        var options = new SweepOptions { Divisions = [3, 3], LinesPerTile = 2, Seed = 71, RefineDepth = 2, MaxDegreeOfParallelism = 1 };
        using var unlimited = new TempAtlas("unlimited");
        using var capped = new TempAtlas("capped");
        using var again = new TempAtlas("again");
        using var storeUnlimited = unlimited.Open();
        using var storeCapped = capped.Open();
        using var storeAgain = again.Open();
        var full = new SweepRunner(storeUnlimited).Run(Cubic, options);
        var levelZero = new SweepRunner(storeAgain).Run(Cubic, options with { RefineDepth = 0 });

        var budget = levelZero.Samples + ((full.Samples - levelZero.Samples) / 3);
        var cut = new SweepRunner(storeCapped).Run(Cubic, options with { SampleBudget = budget });
        using var repeat = new TempAtlas("repeat");
        using var storeRepeat = repeat.Open();
        var cutAgain = new SweepRunner(storeRepeat).Run(Cubic, options with { SampleBudget = budget, MaxDegreeOfParallelism = 2 });

        Assert.InRange(cut.Tiles, levelZero.Tiles + 1, full.Tiles - 1);
        Assert.Equal(cut.ContentHash, cutAgain.ContentHash);
    }

    [Fact]
    public void The_summary_counts_what_the_version_holds()
    {
        using var atlas = new TempAtlas();
        using var store = atlas.Open();
        var summary = new SweepRunner(store).Run(TestFamilies.Example("two-bus"), new SweepOptions { Divisions = [6], LinesPerTile = 2, Seed = 73, MaxDegreeOfParallelism = 1 });
        var snapshot = AtlasSnapshot.Load(store, atlas.Path);

        Assert.Equal(snapshot.Tiles.Count, summary.Tiles);
        Assert.Equal(snapshot.Samples.Count, summary.Samples);
        Assert.Equal(snapshot.Crossings.Count, summary.Crossings);
        Assert.Equal(snapshot.Samples.GroupBy(s => s.Sample.Label).ToDictionary(g => g.Key, g => (long)g.Count()), summary.Labels);
        Assert.Equal(summary.Samples, summary.Kinds.Values.Sum());
        Assert.Equal(summary.Tiles * 2, summary.Kinds["uniform"]);
        Assert.Equal(6, summary.TilesComputed);
        Assert.Equal(snapshot.Version.ContentHash, summary.ContentHash);

        // Two tiles of six hold P = ±B (B = 1.7 on [−3, 3]); each of their lines crosses once.
        Assert.Equal(4, summary.Crossings);
    }

    [Fact]
    public void A_family_without_parameters_cannot_be_swept()
    {
        using var atlas = new TempAtlas();
        using var store = atlas.Open();
        var family = TestFamilies.Build("no parameters", ["x"], ["x^2 - 2"]);
        var error = Assert.Throws<InputException>(() => new SweepRunner(store).Run(family, new SweepOptions { Divisions = [] }));
        Assert.Contains("at least one parameter", error.Message, StringComparison.Ordinal);
    }

    [Theory]
    [InlineData(new[] { 2 }, 2, 0.01, "1 tile divisions given for 2 parameters")]
    [InlineData(new[] { 0, 2 }, 2, 0.01, "between 1 and 4096")]
    [InlineData(new[] { 2, 2 }, 2, 0.25, "near-boundary fraction")]
    [InlineData(new[] { 2, 2 }, 2, 0.0, "near-boundary fraction")]
    public void Invalid_options_are_refused_with_the_values_named(int[] divisions, int parameters, double delta, string message)
    {
        var options = new SweepOptions { Divisions = divisions, DeltaFraction = delta };
        var error = Assert.ThrowsAny<ArgumentException>(() => options.Validate(parameters));
        Assert.Contains(message, error.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void Options_text_holds_everything_that_shapes_content_and_not_the_threads()
    {
        var options = new SweepOptions { Divisions = [3, 4], LinesPerTile = 5, Seed = 9, DeltaFraction = 0.02, RefineDepth = 1, SampleBudget = 1000 };
        Assert.Equal(options.CanonicalText, (options with { MaxDegreeOfParallelism = 7 }).CanonicalText);
        foreach (var other in new[]
        {
            options with { Divisions = [4, 3] },
            options with { LinesPerTile = 6 },
            options with { Seed = 10 },
            options with { DeltaFraction = 0.03 },
            options with { RefineDepth = 2 },
            options with { SampleBudget = null },
        })
        {
            Assert.NotEqual(options.CanonicalText, other.CanonicalText);
            Assert.NotEqual(TileComputer.OptionsHash(options), TileComputer.OptionsHash(other));
        }
    }
}
