using System.Globalization;
using FiberWorkers.Atlas.Sampling;
using FiberWorkers.Atlas.Sweeps;
using FiberWorkers.Atlas.Tests.Support;
using FiberWorkers.Atlas.Tiles;
using FiberWorkers.Contracts.V1;

namespace FiberWorkers.Atlas.Tests.Crossings;

/// <summary>Crossings of the two-bus line and the two-link arm against their closed-form boundaries.</summary>
public sealed class ClosedFormCrossingTests
{
    /// <summary>The two-bus example's line susceptance B.</summary>
    private const double Susceptance = 1.7;

    /// <summary>The two-link arm example's link lengths.</summary>
    private const double L1 = 1.0;

    private const double L2 = 0.6;

    [Fact]
    public void Two_bus_line_crossings_are_exactly_at_P_equal_to_plus_and_minus_B()
    {
        // Reference: B·sin δ = P has two real solutions iff |P| < B and none iff |P| > B (power–angle equation of a
        // lossless line, e.g. Grainger & Stevenson, Power System Analysis — REFERENCES.md). Six tiles on [−3, 3]
        // put ±B = ±1.7 inside tiles L0:1 and L0:4.
        var options = new SweepOptions { Divisions = [6], LinesPerTile = 3, Seed = 4 };
        var context = SweepContexts.Example("two-bus", options);
        var foldsAt = new List<double>();
        for (var i = 0; i < 6; i++)
        {
            var key = new TileKey(0, [i]);
            var (tile, _) = TileComputer.Compute(context, key);
            Assert.Empty(tile.Flags);
            var inside = tile.Low[0] < Susceptance && Susceptance < tile.High[0] || tile.Low[0] < -Susceptance && -Susceptance < tile.High[0];
            Assert.Equal(inside ? options.LinesPerTile : 0, tile.Crossings.Count);
            foreach (var crossing in tile.Crossings)
            {
                var p = crossing.Point[0];
                Assert.Equal(CrossingKind.Fold, crossing.Kind);
                Assert.True(Math.Abs(Math.Abs(p) - Susceptance) <= 1e-12, $"tile {key}: crossing at P = {p:R}, not ±{Susceptance}");
                Assert.Equal(1.0, Math.Abs(Assert.Single(crossing.Normal)), 1e-12);

                // The fold is the single operating point at δ = ±90°: (cos δ, sin δ) = (0, ±1).
                Assert.True(Math.Abs(crossing.Solution[0]) < 1e-6 && Math.Abs(crossing.Solution[1] - Math.Sign(p)) < 1e-9, $"tile {key}: fold solution {Text(crossing.Solution)}");
                foldsAt.Add(p);
            }

            foreach (var sample in tile.Samples)
            {
                var p = sample.Point[0];
                Assert.True(sample.Label == (Math.Abs(p) < Susceptance ? 2 : 0), $"tile {key}: sample at P = {p:R} has label {sample.Label}");
                for (var r = 0; r < sample.Label; r++)
                {
                    var (cos, sin) = (sample.Solutions[2 * r], sample.Solutions[(2 * r) + 1]);
                    Assert.True(Math.Abs(sin - (p / Susceptance)) < 1e-9 && Math.Abs((cos * cos) + (sin * sin) - 1) < 1e-9, $"tile {key}: ({cos:R}, {sin:R}) at P = {p:R}");
                }
            }
        }

        Assert.Equal(options.LinesPerTile, foldsAt.Count(p => p > 0));
        Assert.Equal(options.LinesPerTile, foldsAt.Count(p => p < 0));
    }

    [Fact]
    public void Two_link_arm_crossings_lie_on_the_circles_of_radius_L1_plus_L2_and_L1_minus_L2()
    {
        // Reference: a planar two-link arm reaches a target at distance r in two ways iff |L1 − L2| < r < L1 + L2
        // and not at all outside (standard robot kinematics, e.g. Craig, Introduction to Robotics — REFERENCES.md).
        // The reference crossings of a line o + s·d are the roots of |o + s·d|² = r², a quadratic in s.
        var options = new SweepOptions { Divisions = [4, 4], LinesPerTile = 4, Seed = 9 };
        var context = SweepContexts.Example("two-link-arm", options);
        var lines = new List<BoxLine>();
        for (var i = 0; i < 4; i++)
        {
            for (var j = 0; j < 4; j++)
            {
                var (tile, _) = TileComputer.Compute(context, new TileKey(0, [i, j]));
                Assert.Empty(tile.Flags);
                lines.AddRange(tile.Lines.Select(BoxLine.Of));

                // The locus normal of a circle about the origin is radial (both axes are 4 wide, so normalization
                // keeps directions).
                foreach (var crossing in tile.Crossings)
                {
                    var r = Radius(crossing.Point[0], crossing.Point[1]);
                    var alignment = Math.Abs(((crossing.Normal[0] * crossing.Point[0]) + (crossing.Normal[1] * crossing.Point[1])) / r);
                    Assert.True(alignment > 1 - 1e-9, $"tile L0:{i},{j}: normal ({Text(crossing.Normal)}) at ({crossing.Point[0]:R}, {crossing.Point[1]:R})");
                }

                foreach (var sample in tile.Samples)
                {
                    var r = Radius(sample.Point[0], sample.Point[1]);
                    Assert.True(sample.Label == (r > L1 - L2 && r < L1 + L2 ? 2 : 0), $"tile L0:{i},{j}: sample at r = {r:R} has label {sample.Label}");
                }
            }
        }

        lines.AddRange(BoxLines.Draw(context.Family.Parameters, 24, seed: 3_407));
        var onOuter = 0;
        var onInner = 0;
        foreach (var (line, index) in lines.Select((l, i) => (l, i)))
        {
            var (found, _) = context.Crossings.Find(line.Origin, line.Direction, line.SMin, line.SMax);
            var expected = CircleRoots(line, L1 + L2).Concat(CircleRoots(line, L1 - L2)).Order().ToList();
            Assert.True(
                expected.Count == found.Count,
                $"line {index}: crossings at s = [{Text(found.Select(c => c.S))}], the circles meet the segment at s = [{Text(expected)}]");
            for (var k = 0; k < expected.Count; k++)
            {
                var crossing = found[k];
                Assert.Equal(CrossingKind.Fold, crossing.Kind);
                Assert.True(Math.Abs(crossing.S - expected[k]) <= 1e-8, $"line {index}: crossing at s = {crossing.S:R}, reference {expected[k]:R}");
                var p = line.At(crossing.S);
                var r = Radius(p[0], p[1]);

                // At the outer circle the arm is stretched (both links point at the target); at the inner one it is
                // folded back (the second link points away).
                var outer = Math.Abs(r - (L1 + L2)) < Math.Abs(r - (L1 - L2));
                var (ux, uy) = (p[0] / r, p[1] / r);
                var sign = outer ? 1 : -1;
                var solution = crossing.Solution;
                Assert.True(
                    Math.Abs(solution[0] - ux) < 1e-6 && Math.Abs(solution[1] - uy) < 1e-6 && Math.Abs(solution[2] - (sign * ux)) < 1e-6 && Math.Abs(solution[3] - (sign * uy)) < 1e-6,
                    $"line {index}: fold solution {Text(solution)} at r = {r:R}");
                onOuter += outer ? 1 : 0;
                onInner += outer ? 0 : 1;
            }
        }

        Assert.True(onOuter >= 10 && onInner >= 4, $"{onOuter} crossings on the outer circle, {onInner} on the inner one");
    }

    [Fact]
    public void Two_link_arm_samples_on_long_lines_are_labeled_two_inside_the_annulus_and_zero_outside()
    {
        // Reference as above (standard robot kinematics): 2 real solutions iff |L1 − L2| < r < L1 + L2.
        var options = new SweepOptions { Divisions = [4, 4], LinesPerTile = 4, Seed = 9 };
        var context = SweepContexts.Example("two-link-arm", options);
        var sampler = new LineSampler(context.FamilySolver, context.FamilyStart);
        var labels = new int[3];
        foreach (var line in BoxLines.Draw(context.Family.Parameters, 12, seed: 611))
        {
            var (found, _) = context.Crossings.Find(line.Origin, line.Direction, line.SMin, line.SMax);
            var flags = new List<string>();
            foreach (var sample in sampler.Sample(0, line.Origin, line.Direction, line.SMin, line.SMax, found, 0.003, flags))
            {
                var r = Radius(sample.Point[0], sample.Point[1]);
                Assert.True(sample.Label == (r > L1 - L2 && r < L1 + L2 ? 2 : 0), $"{AtlasContent.KindName(sample.Kind)} sample at r = {r:R} has label {sample.Label}");
                labels[sample.Label]++;
            }

            Assert.Empty(flags);
        }

        Assert.True(labels[0] > 5 && labels[2] > 5, $"labels 0: {labels[0]}, 2: {labels[2]}");
    }

    [Fact]
    public void Reaction_switch_crossings_are_the_real_roots_of_the_cubic_discriminant_along_each_line()
    {
        // Reference: a·x³ + b·x² + c·x + d has three distinct real roots iff Δ = 18abcd − 4b³d + b²c² − 4ac³ − 27a²d²
        // is positive and one iff it is negative (discriminant of the cubic; Cox, Little & O'Shea — REFERENCES.md).
        // For k1a·x² − k2·x³ + feed − decay·x with k1a = 3, k2 = 1: a = −1, b = 3, c = −decay, d = feed, so
        // Δ = 54·decay·feed − 108·feed + 9·decay² − 4·decay³ − 27·feed², a cubic in s along a line (expanded below
        // by MathNet's polynomial arithmetic, roots by MathNet). The bistable region Δ > 0 is the cusp-shaped region
        // of the Schlögl network (Schlögl, Z. Physik 253 (1972) — REFERENCES.md).
        var options = new SweepOptions { Divisions = [3, 3], LinesPerTile = 4, Seed = 13 };
        var context = SweepContexts.Example("reaction-switch", options);
        var lines = new List<BoxLine>();
        for (var i = 0; i < 3; i++)
        {
            for (var j = 0; j < 3; j++)
            {
                var (tile, _) = TileComputer.Compute(context, new TileKey(0, [i, j]));
                Assert.Empty(tile.Flags);
                lines.AddRange(tile.Lines.Select(BoxLine.Of));
                foreach (var sample in tile.Samples)
                {
                    var delta = Discriminant(sample.Point[0], sample.Point[1]);
                    Assert.True(sample.Label == (delta > 0 ? 3 : 1), $"tile L0:{i},{j}: sample at (decay, feed) = ({sample.Point[0]:R}, {sample.Point[1]:R}) has label {sample.Label}, Δ = {delta:G4}");
                }
            }
        }

        lines.AddRange(BoxLines.Draw(context.Family.Parameters, 24, seed: 1_972));
        var total = 0;
        foreach (var (line, index) in lines.Select((l, i) => (l, i)))
        {
            var (found, _) = context.Crossings.Find(line.Origin, line.Direction, line.SMin, line.SMax);
            var decay = new MathNet.Numerics.Polynomial(line.Origin[0], line.Direction[0]);
            var feed = new MathNet.Numerics.Polynomial(line.Origin[1], line.Direction[1]);
            var delta = (54 * decay * feed) - (108 * feed) + (9 * decay * decay) - (4 * decay * decay * decay) - (27 * feed * feed);
            var scale = 1 + Math.Max(Math.Abs(line.SMin), Math.Abs(line.SMax));
            var expected = delta.Roots()
                .Where(r => Math.Abs(r.Imaginary) <= 1e-9 * scale && r.Real >= line.SMin && r.Real <= line.SMax)
                .Select(r => r.Real)
                .Order()
                .ToList();
            Assert.True(
                expected.Count == found.Count,
                $"line {index}: crossings at s = [{Text(found.Select(c => c.S))}], the discriminant's real roots in the segment are [{Text(expected)}]");
            for (var k = 0; k < expected.Count; k++)
            {
                Assert.Equal(CrossingKind.Fold, found[k].Kind);
                Assert.True(Math.Abs(found[k].S - expected[k]) <= 1e-8, $"line {index}: crossing at s = {found[k].S:R}, reference {expected[k]:R}");
            }

            total += found.Count;
        }

        Assert.True(total >= 10, $"{total} crossings");
    }

    /// <summary>Δ of −x³ + 3x² − decay·x + feed (see the reaction-switch test).</summary>
    private static double Discriminant(double decay, double feed) =>
        (54 * decay * feed) - (108 * feed) + (9 * decay * decay) - (4 * decay * decay * decay) - (27 * feed * feed);

    private static double Radius(double x, double y) => Math.Sqrt((x * x) + (y * y));

    /// <summary>Roots in [sMin, sMax] of |o + s·d|² = r², by the quadratic formula in its cancellation-free form.</summary>
    private static IEnumerable<double> CircleRoots(BoxLine line, double radius)
    {
        var (o, d) = (line.Origin, line.Direction);
        var a = (d[0] * d[0]) + (d[1] * d[1]);
        var halfB = (o[0] * d[0]) + (o[1] * d[1]);
        var c = (o[0] * o[0]) + (o[1] * o[1]) - (radius * radius);
        var quarterDiscriminant = (halfB * halfB) - (a * c);
        if (quarterDiscriminant <= 0)
        {
            yield break;
        }

        var q = -(halfB + (Math.Sign(halfB == 0 ? 1 : halfB) * Math.Sqrt(quarterDiscriminant)));
        foreach (var s in new[] { q / a, c / q })
        {
            Assert.True(Math.Min(Math.Abs(s - line.SMin), Math.Abs(line.SMax - s)) > 1e-6, "a reference root at a segment end would make the count a matter of rounding");
            if (s >= line.SMin && s <= line.SMax)
            {
                yield return s;
            }
        }
    }

    private static string Text(IEnumerable<double> values) => string.Join(", ", values.Select(v => v.ToString("R", CultureInfo.InvariantCulture)));
}
