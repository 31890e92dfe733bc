using System.Globalization;
using FiberWorkers.Algebra.Families;
using FiberWorkers.Atlas.Sampling;
using FiberWorkers.Atlas.Stores;
using FiberWorkers.Atlas.Sweeps;
using FiberWorkers.Atlas.Tests.Support;
using FiberWorkers.Atlas.Tiles;
using FiberWorkers.Contracts.V1;
using FiberWorkers.Testing;

namespace FiberWorkers.Atlas.Tests.Crossings;

/// <summary>
/// Crossings at infinity. a·x² − 1 = 0 has the real roots ±1/√a for a &gt; 0 and none for a &lt; 0; as a → 0⁺ both
/// roots run off to infinity together, so a = 0 is a fold at infinity. The affine extended system
/// { a·x² − 1 = 0, 2a·x·v = 0, v = 1 } has no solution there (the second equation forces a·x = 0, the first then
/// reads −1 = 0): only the homogenized system sees it. (Elementary algebra, no source.)
/// </summary>
public sealed class InfinityCrossingTests
{
    private static readonly FamilyDefinition FoldAtInfinity =
        TestFamilies.Build("fold at infinity", ["x"], ["a*x^2 - 1"], [("a", -1.0, 1.0)]);

    /// <summary>
    /// a·x² + b·x − 1: real roots iff b² + 4a ≥ 0 (quadratic formula). Where a crosses 0 with b ≠ 0 one root
    /// passes through infinity (x ≈ −b/a) and comes back real with its sign flipped: a passage, not a boundary;
    /// the boundary is the parabola b² + 4a = 0, where the double root is x = −b/(2a) = 2/b.
    /// </summary>
    private static readonly FamilyDefinition Passage =
        TestFamilies.Build("passage through infinity", ["x"], ["a*x^2 + b*x - 1"], [("a", -1.0, 1.0), ("b", -1.0, 1.0)]);

    [Theory]
    [InlineData(3)] // a = 0 inside the middle tile [−1/3, 1/3]
    [InlineData(5)] // a = 0 inside the middle tile [−1/5, 1/5]
    public void A_fold_at_infinity_inside_a_tile_is_found_and_both_sides_are_labeled(int tiles)
    {
        var options = new SweepOptions { Divisions = [tiles], LinesPerTile = 2, Seed = 21 };
        var context = SweepContexts.For(FoldAtInfinity, options);
        var middle = new TileKey(0, [tiles / 2]);
        var (tile, _) = TileComputer.Compute(context, middle);
        Assert.Empty(tile.Flags);

        // One crossing per line, at a = 0, of kind fold-at-infinity, with the direction at infinity x = ±1.
        Assert.Equal(options.LinesPerTile, tile.Crossings.Count);
        foreach (var crossing in tile.Crossings)
        {
            Assert.Equal(CrossingKind.FoldAtInfinity, crossing.Kind);
            Assert.True(Math.Abs(crossing.Point[0]) <= 1e-10, $"crossing at a = {crossing.Point[0]:R}");
            Assert.Equal(1.0, Math.Abs(crossing.Solution[0]), 1e-9);
        }

        AssertLabels(tile);
        Assert.Contains(tile.Samples, s => s.Kind == SampleKind.NearBoundary && s.Point[0] < 0 && s.Label == 0);
        Assert.Contains(tile.Samples, s => s.Kind == SampleKind.NearBoundary && s.Point[0] > 0 && s.Label == 2);
    }

    [Theory]
    [InlineData(2)] // a = 0 is the edge between [−1, 0] and [0, 1]
    [InlineData(4)] // a = 0 is the edge between [−1/2, 0] and [0, 1/2]
    public void A_fold_at_infinity_on_a_tile_edge_is_found_by_both_neighbours(int tiles)
    {
        var options = new SweepOptions { Divisions = [tiles], LinesPerTile = 2, Seed = 22 };
        var context = SweepContexts.For(FoldAtInfinity, options);
        var below = TileComputer.Compute(context, new TileKey(0, [(tiles / 2) - 1])).Result;
        var above = TileComputer.Compute(context, new TileKey(0, [tiles / 2])).Result;
        Assert.Equal(0.0, below.High[0]);
        Assert.Equal(0.0, above.Low[0]);
        foreach (var tile in new[] { below, above })
        {
            Assert.Empty(tile.Flags);
            Assert.Equal(options.LinesPerTile, tile.Crossings.Count);
            Assert.All(tile.Crossings, c => Assert.Equal(CrossingKind.FoldAtInfinity, c.Kind));
            Assert.All(tile.Crossings, c => Assert.True(Math.Abs(c.Point[0]) <= 1e-10, $"tile {tile.TileKey}: crossing at a = {c.Point[0]:R}"));
            AssertLabels(tile);

            // The side inside the tile gets a near-boundary sample at the edge.
            Assert.Equal(options.LinesPerTile, tile.Samples.Count(s => s.Kind == SampleKind.NearBoundary));
        }

        Assert.All(below.Samples, s => Assert.Equal(0, s.Label));
        Assert.All(above.Samples, s => Assert.Equal(2, s.Label));
    }

    [Fact]
    public void A_sweep_over_the_fold_at_infinity_labels_both_sides_and_records_the_crossing()
    {
        using var atlas = new TempAtlas();
        using var store = atlas.Open();
        var summary = new SweepRunner(store).Run(FoldAtInfinity, new SweepOptions { Divisions = [3], LinesPerTile = 2, Seed = 23, MaxDegreeOfParallelism = 1 });
        var snapshot = AtlasSnapshot.Load(store, atlas.Path);

        Assert.Equal([0, 2], summary.Labels.Keys.Order());
        Assert.Equal(0, summary.Flags);
        var crossings = snapshot.Crossings.Select(c => c.Crossing).ToList();
        Assert.Equal(2, crossings.Count);
        Assert.All(crossings, c => Assert.Equal("fold-at-infinity", AtlasContent.KindName(c.Kind)));
        foreach (var (tile, sample) in snapshot.Samples)
        {
            Assert.True(sample.Label == (sample.Point[0] > 0 ? 2 : 0), $"tile {tile}: sample at a = {sample.Point[0]:R} has label {sample.Label}");
        }
    }

    [Fact]
    public void A_passage_through_infinity_is_recorded_but_the_label_does_not_change_across_it()
    {
        var options = new SweepOptions { Divisions = [2, 2], LinesPerTile = 2, Seed = 31 };
        var context = SweepContexts.For(Passage, options);
        var sampler = new LineSampler(context.FamilySolver, context.FamilyStart);
        var passages = 0;
        var folds = 0;
        foreach (var (line, index) in BoxLines.Draw(Passage.Parameters, 16, seed: 2_718).Select((l, i) => (l, i)))
        {
            var (found, _) = context.Crossings.Find(line.Origin, line.Direction, line.SMin, line.SMax);

            // References in closed form: a(s) = 0 (passages, unless b = 0 there too) and b(s)² + 4a(s) = 0 (folds).
            var aZero = -line.Origin[0] / line.Direction[0];
            var expectedPassages = aZero > line.SMin && aZero < line.SMax ? 1 : 0;
            var (o, d) = (line.Origin, line.Direction);
            var parabola = QuadraticRoots(d[1] * d[1], (2 * o[1] * d[1]) + (4 * d[0]), (o[1] * o[1]) + (4 * o[0]))
                .Where(s => s > line.SMin && s < line.SMax).Order().ToList();
            var where = $"line {index}: crossings {string.Join(", ", found.Select(c => $"{AtlasContent.KindName(c.Kind)} at s = {c.S.ToString("R", CultureInfo.InvariantCulture)}"))}";

            var passage = found.Where(c => c.Kind == CrossingKind.Passage).ToList();
            Assert.True(passage.Count == expectedPassages, $"{where}; a = 0 at s = {aZero:R}");
            Assert.All(passage, c => Assert.True(Math.Abs(c.S - aZero) <= 1e-8, $"{where}; a = 0 at s = {aZero:R}"));
            var fold = found.Where(c => c.Kind == CrossingKind.Fold).ToList();
            Assert.True(fold.Count == parabola.Count, $"{where}; b² + 4a = 0 at s = [{string.Join(", ", parabola)}]");
            for (var k = 0; k < fold.Count; k++)
            {
                Assert.True(Math.Abs(fold[k].S - parabola[k]) <= 1e-8, $"{where}; b² + 4a = 0 at s = {parabola[k]:R}");
                var b = line.At(fold[k].S)[1];
                Assert.True(Math.Abs(fold[k].Solution[0] - (2 / b)) <= 1e-6 * (1 + Math.Abs(2 / b)), $"{where}: double root {fold[k].Solution[0]:R}, expected 2/b = {2 / b:R}");
            }

            Assert.DoesNotContain(found, c => c.Kind == CrossingKind.FoldAtInfinity);

            // Labels by the sign of b² + 4a on every sample; no flag, so the count agreed on both sides of each passage.
            var flags = new List<string>();
            foreach (var sample in sampler.Sample(index, line.Origin, line.Direction, line.SMin, line.SMax, found, 0.002, flags))
            {
                var (a, b) = (sample.Point[0], sample.Point[1]);
                Assert.True(sample.Label == ((b * b) + (4 * a) > 0 ? 2 : 0), $"{where}: sample at (a, b) = ({a:R}, {b:R}) has label {sample.Label}");
            }

            Assert.Empty(flags);
            passages += passage.Count;
            folds += fold.Count;
        }

        Assert.True(passages >= 5 && folds >= 3, $"{passages} passages, {folds} folds");
    }

    private static void AssertLabels(TileResult tile)
    {
        // Reference: a·x² − 1 has two real roots for a > 0 and none for a < 0.
        foreach (var sample in tile.Samples)
        {
            var a = sample.Point[0];
            Assert.True(sample.Label == (a > 0 ? 2 : 0), $"tile {tile.TileKey}: {AtlasContent.KindName(sample.Kind)} sample at a = {a:R} has label {sample.Label}");
            for (var r = 0; r < sample.Label; r++)
            {
                Assert.Equal(1 / Math.Sqrt(a), Math.Abs(sample.Solutions[r]), 1e-9 / a);
            }
        }
    }

    /// <summary>Real roots of A·s² + B·s + C (cancellation-free quadratic formula).</summary>
    private static IEnumerable<double> QuadraticRoots(double a, double b, double c)
    {
        var discriminant = (b * b) - (4 * a * c);
        if (discriminant <= 0)
        {
            yield break;
        }

        var q = -0.5 * (b + (Math.Sign(b == 0 ? 1 : b) * Math.Sqrt(discriminant)));
        yield return q / a;
        yield return c / q;
    }
}
