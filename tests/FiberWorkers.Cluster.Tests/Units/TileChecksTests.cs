using FiberWorkers.Atlas.Sweeps;
using FiberWorkers.Atlas.Tiles;
using FiberWorkers.Cluster.Coordination;
using FiberWorkers.Contracts.V1;
using FiberWorkers.Testing;

namespace FiberWorkers.Cluster.Tests.Units;

/// <summary>The coordinator's checks of tile results: the real result passes, every kind of garbage is caught.</summary>
public sealed class TileChecksTests
{
    private static readonly Lazy<(SweepContext Context, TileKey Key, TileResult Result)> Computed = new(() =>
    {
        var family = TestFamilies.Example("cubic");
        var options = new SweepOptions { Divisions = [3, 3], LinesPerTile = 4, Seed = 3, MaxDegreeOfParallelism = 1 };
        var context = SweepContext.Create(family, options);
        var key = new TileKey(0, [1, 2]);
        return (context, key, TileComputer.Compute(context, key).Result);
    });

    public static TheoryData<string> Damage => new() { "family", "key", "seed", "options", "bounds", "lines", "label", "solutions", "point", "nan", "kind", "crossing" };

    [Fact]
    public void The_result_a_worker_computes_passes()
    {
        var (context, key, result) = Computed.Value;
        TileChecks.Check(result, context, key, "w");
    }

    [Theory]
    [MemberData(nameof(Damage))]
    public void A_damaged_result_is_refused_with_the_worker_and_tile_named(string damage)
    {
        var (context, key, original) = Computed.Value;
        var result = original.Clone();
        Assert.NotEmpty(result.Samples);
        switch (damage)
        {
            case "family": result.FamilyHash = "0" + result.FamilyHash[1..]; break;
            case "key": result.TileKey = "L0:2,2"; break;
            case "seed": result.Seed++; break;
            case "options": result.OptionsHash = "x"; break;
            case "bounds": result.Low[0] += 1e-9; break;
            case "lines": result.Lines.RemoveAt(0); break;
            case "label": result.Samples[0].Label = 99; break;
            case "solutions": result.Samples[0].Solutions.Add(1.0); break;
            case "point": result.Samples[0].Point.Add(0.5); break;
            case "nan": result.Samples[0].Point[0] = double.NaN; break;
            case "kind": result.Samples[0].Kind = SampleKind.Unspecified; break;
            case "crossing": result.Crossings.Add(new Crossing { Kind = CrossingKind.Fold, Line = 0 }); break;
        }

        var error = Assert.Throws<InvalidTileException>(() => TileChecks.Check(result, context, key, "w7"));
        Assert.Contains("worker w7 answered tile L0:1,2", error.Message, StringComparison.Ordinal);
    }
}
