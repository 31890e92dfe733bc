using System.Globalization;
using FiberWorkers.Atlas.Sampling;
using FiberWorkers.Atlas.Sweeps;
using FiberWorkers.Atlas.Tests.Support;
using FiberWorkers.Atlas.Tiles;
using FiberWorkers.Contracts.V1;
using FiberWorkers.Testing;
using FindRoots = MathNet.Numerics.FindRoots;

namespace FiberWorkers.Atlas.Tests.Crossings;

/// <summary>
/// The depressed cubic x³ + b·x + c against its discriminant: x³ + b·x + c has three distinct real roots iff
/// 4b³ + 27c² &lt; 0 and one iff 4b³ + 27c² &gt; 0 (discriminant of the cubic; Cox, Little &amp; O'Shea, <i>Ideals,
/// Varieties, and Algorithms</i> — REFERENCES.md). Along a line (b, c) = (b₀, c₀) + s·(d_b, d_c) the discriminant is
/// a cubic in s, expanded here by hand; its real roots, found by MathNet.Numerics (companion-matrix eigenvalues), are
/// the reference crossings.
/// </summary>
public sealed class DepressedCubicCrossingTests
{
    /// <summary>Crossings agree with the reference roots to this, in s (the line's own parameter).</summary>
    private const double CrossingTolerance = 1e-8;

    private static readonly SweepOptions Options = new() { Divisions = [4, 4], LinesPerTile = 4, Seed = 11 };

    [Fact]
    public void Crossings_on_the_sweep_lines_are_the_real_roots_of_the_discriminant_along_each_line()
    {
        var context = SweepContexts.Example("cubic", Options);
        var lines = 0;
        var crossings = 0;
        foreach (var key in TileGrid.LevelZero(Options.Divisions))
        {
            var (tile, _) = TileComputer.Compute(context, key);
            for (var index = 0; index < tile.Lines.Count; index++)
            {
                var line = BoxLine.Of(tile.Lines[index]);
                var found = tile.Crossings.Where(c => c.Line == index).ToList();
                AssertCrossingsAreTheReferenceRoots(line, [.. found.Select(c => c.S)], $"tile {key}, line {index}");
                Assert.All(found, c => Assert.Equal(CrossingKind.Fold, c.Kind));

                // The stored locus normal is the gradient (12b², 54c) of 4b³ + 27c², scaled to box-normalized
                // coordinates by the axis widths (4 and 4) and to unit length, up to sign (a gradient is normal to the
                // level set; any calculus text).
                foreach (var crossing in found)
                {
                    var (b, c) = (crossing.Point[0], crossing.Point[1]);
                    var (gb, gc) = (12 * b * b * 4.0, 54 * c * 4.0);
                    var length = Math.Sqrt((gb * gb) + (gc * gc));
                    Assert.Equal(2, crossing.Normal.Count);
                    var alignment = Math.Abs((crossing.Normal[0] * gb / length) + (crossing.Normal[1] * gc / length));
                    Assert.True(alignment > 1 - 1e-9, $"tile {key}, line {index}: normal ({Text(crossing.Normal)}) at {Text([b, c])}, gradient ({gb / length:R}, {gc / length:R})");
                }

                lines++;
                crossings += found.Count;
            }
        }

        // The 4x4 grid puts the discriminant curve through several tiles: the check is not vacuous.
        Assert.Equal(64, lines);
        Assert.InRange(crossings, 8, 64);
    }

    [Fact]
    public void Crossings_on_random_lines_through_the_whole_box_are_the_real_roots_of_the_discriminant()
    {
        var context = SweepContexts.Example("cubic", Options);
        var withTwoOrMore = 0;
        foreach (var (line, index) in BoxLines.Draw(context.Family.Parameters, 40, seed: 5_031).Select((l, i) => (l, i)))
        {
            var (found, _) = context.Crossings.Find(line.Origin, line.Direction, line.SMin, line.SMax);
            AssertCrossingsAreTheReferenceRoots(line, [.. found.Select(c => c.S)], $"box line {index}");

            // At a fold of x³ + b·x + c the double root x satisfies 3x² + b = 0 as well (it is a root of the derivative).
            foreach (var crossing in found)
            {
                var p = line.At(crossing.S);
                var x = crossing.Solution[0];
                Assert.True(Math.Abs((x * x * x) + (p[0] * x) + p[1]) < 1e-9, $"box line {index}: x = {x:R} is no root at {Text(p)}");
                Assert.True(Math.Abs((3 * x * x) + p[0]) < 1e-6, $"box line {index}: x = {x:R} is no double root at {Text(p)}");
            }

            withTwoOrMore += found.Count >= 2 ? 1 : 0;
        }

        // Lines through the whole box cross the cusp-shaped curve twice quite often.
        Assert.InRange(withTwoOrMore, 5, 40);
    }

    [Fact]
    public void Samples_are_labeled_three_where_the_discriminant_is_negative_and_one_where_it_is_positive()
    {
        var context = SweepContexts.Example("cubic", Options);
        var sampler = new LineSampler(context.FamilySolver, context.FamilyStart);
        var counts = new Dictionary<int, int>();
        foreach (var line in BoxLines.Draw(context.Family.Parameters, 24, seed: 8_117))
        {
            var (found, _) = context.Crossings.Find(line.Origin, line.Direction, line.SMin, line.SMax);
            var flags = new List<string>();
            var samples = sampler.Sample(0, line.Origin, line.Direction, line.SMin, line.SMax, found, 0.002, flags);
            Assert.Empty(flags);
            foreach (var sample in samples)
            {
                var (b, c) = (sample.Point[0], sample.Point[1]);
                var discriminant = (4 * b * b * b) + (27 * c * c);
                var where = $"{AtlasContent.KindName(sample.Kind)} sample at {Text([b, c])}, 4b³ + 27c² = {discriminant.ToString("G4", CultureInfo.InvariantCulture)}";
                Assert.True(discriminant != 0, where);
                Assert.True(sample.Label == (discriminant < 0 ? 3 : 1), $"{where}: label {sample.Label}");
                Assert.Equal(sample.Label, sample.Solutions.Count);
                foreach (var x in sample.Solutions)
                {
                    Assert.True(Math.Abs((x * x * x) + (b * x) + c) < 1e-9, $"{where}: x = {x:R} is not a root");
                }

                counts[sample.Label] = counts.GetValueOrDefault(sample.Label) + 1;
            }
        }

        Assert.True(counts.GetValueOrDefault(3) > 10 && counts.GetValueOrDefault(1) > 10, $"labels {string.Join(", ", counts)}");
    }

    [Fact]
    public void Sweep_tile_samples_are_labeled_by_the_sign_of_the_discriminant()
    {
        var context = SweepContexts.Example("cubic", Options);
        var nearBoundary = 0;
        foreach (var key in TileGrid.LevelZero(Options.Divisions))
        {
            var (tile, _) = TileComputer.Compute(context, key);
            Assert.Empty(tile.Flags);
            foreach (var sample in tile.Samples)
            {
                var (b, c) = (sample.Point[0], sample.Point[1]);
                var discriminant = (4 * b * b * b) + (27 * c * c);
                Assert.True(
                    sample.Label == (discriminant < 0 ? 3 : 1),
                    $"tile {key}: {AtlasContent.KindName(sample.Kind)} sample at {Text([b, c])} has label {sample.Label}, 4b³ + 27c² = {discriminant:G4}");
                nearBoundary += sample.Kind == SampleKind.NearBoundary ? 1 : 0;
            }
        }

        Assert.True(nearBoundary >= 16, $"{nearBoundary} near-boundary samples");
    }

    /// <summary>The found crossings equal the real roots of 4b(s)³ + 27c(s)² in [sMin, sMax], one to one.</summary>
    private static void AssertCrossingsAreTheReferenceRoots(BoxLine line, List<double> found, string where)
    {
        var (b0, c0, db, dc) = (line.Origin[0], line.Origin[1], line.Direction[0], line.Direction[1]);

        // 4(b₀ + s·d_b)³ + 27(c₀ + s·d_c)², ascending powers of s.
        double[] coefficients =
        [
            (4 * b0 * b0 * b0) + (27 * c0 * c0),
            (12 * b0 * b0 * db) + (54 * c0 * dc),
            (12 * b0 * db * db) + (27 * dc * dc),
            4 * db * db * db,
        ];
        var roots = FindRoots.Polynomial(coefficients);
        var scale = 1 + Math.Max(Math.Abs(line.SMin), Math.Abs(line.SMax));

        // A nearly tangent line would make a near-double root whose reality is a matter of rounding: none of our
        // seeded lines is one, and the test says so rather than deciding silently.
        Assert.DoesNotContain(roots, r => Math.Abs(r.Imaginary) > 1e-9 * scale && Math.Abs(r.Imaginary) < 1e-4 * scale
            && r.Real > line.SMin - 1e-4 && r.Real < line.SMax + 1e-4);
        var expected = roots
            .Where(r => Math.Abs(r.Imaginary) <= 1e-9 * scale && r.Real >= line.SMin && r.Real <= line.SMax)
            .Select(r => r.Real)
            .Order()
            .ToList();
        Assert.DoesNotContain(expected, s => Math.Min(s - line.SMin, line.SMax - s) < 1e-6);
        found = [.. found.Order()];
        Assert.True(
            expected.Count == found.Count,
            $"{where}: crossings at s = [{Text([.. found])}], the discriminant's real roots in [{line.SMin:R}, {line.SMax:R}] are [{Text([.. expected])}]");
        for (var i = 0; i < expected.Count; i++)
        {
            Assert.True(Math.Abs(expected[i] - found[i]) <= CrossingTolerance, $"{where}: crossing at s = {found[i]:R}, reference root {expected[i]:R}");
        }
    }


    private static string Text(IEnumerable<double> values) => string.Join(", ", values.Select(v => v.ToString("R", CultureInfo.InvariantCulture)));
}
