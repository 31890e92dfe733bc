using System.Numerics;
using FiberWorkers.Atlas.Resolve;
using FiberWorkers.Atlas.Stores;
using FiberWorkers.Atlas.Sweeps;
using FiberWorkers.Atlas.Tests.Support;
using FiberWorkers.Contracts.V1;
using FiberWorkers.Testing;

namespace FiberWorkers.Atlas.Tests.Resolve;

public sealed class ResolverTests
{
    public static TheoryData<string, int, int> Families => new()
    {
        { "cubic", 6, 8 },
        { "two-link-arm", 6, 6 },
        { "microgrid3", 5, 5 },
    };

    [Theory]
    [MemberData(nameof(Families))]
    public void Resolve_answers_equal_full_solve_answers_at_500_points_including_near_boundary_ones(string example, int tiles, int lines)
    {
        using var atlas = new TempAtlas(example);
        using var store = atlas.Open();
        var family = TestFamilies.Example(example);
        new SweepRunner(store).Run(family, new SweepOptions { Divisions = [tiles, tiles], LinesPerTile = lines, MaxDegreeOfParallelism = 2 });
        var snapshot = AtlasSnapshot.Load(store, $"{example}.db");
        var resolver = AtlasResolver.Create(store, snapshot);
        var random = new Random(example.Length * 131);
        var folds = snapshot.Crossings.Where(c => c.Crossing.Kind == CrossingKind.Fold).Select(c => c.Crossing).ToArray();
        Assert.NotEmpty(folds);
        var fast = 0;
        for (var i = 0; i < 500; i++)
        {
            var point = RandomPoint(family, folds, random, nearBoundary: i % 3 == 0);

            var answer = resolver.Ask(point);
            var full = resolver.SolveFull(point);
            fast += answer.Method == "real-track" ? 1 : 0;
            var real = full.RealSolutions.ToArray();
            Assert.True(answer.RealCount == real.Length, $"{example} at ({point[0]}, {point[1]}): {answer.Method} gave {answer.RealCount}, the full solve {real.Length}");
            foreach (var solution in answer.Solutions)
            {
                Assert.Contains(real, r => Distance(r.Values, solution.Values) <= 1e-9 * (1 + Norm(r.Values)));
            }
        }

        // The fast path must actually be taken for most points away from the locus.
        Assert.True(fast >= 150, $"{example}: only {fast} of 500 answered by real-only tracking");
    }

    [Fact]
    public void A_query_whose_nearest_sample_lies_across_a_crossing_does_not_get_a_wrong_count()
    {
        // A sparse cubic atlas: queries just across the locus from a sample often have that sample as their nearest.
        // Whatever path answers, the count must follow the discriminant rule (4b³ + 27c² < 0 ⇔ 3 real roots).
        using var atlas = new TempAtlas("across");
        using var store = atlas.Open();
        var family = TestFamilies.Example("cubic");
        new SweepRunner(store).Run(family, new SweepOptions { Divisions = [3, 3], LinesPerTile = 2, MaxDegreeOfParallelism = 2 });
        var snapshot = AtlasSnapshot.Load(store, "across.db");
        var resolver = AtlasResolver.Create(store, snapshot);
        var random = new Random(17);
        var across = 0;
        foreach (var (_, sample) in snapshot.Samples)
        {
            // Walk from the sample towards and just past the locus along c (the discriminant is quadratic in c).
            var b = sample.Point[0];
            if (b >= -0.05)
            {
                continue;
            }

            var edge = Math.Sqrt(-4 * b * b * b / 27);
            foreach (var sign in new[] { -1.0, 1.0 })
            {
                var c = (sign * edge) + (sample.Label == 3 ? sign : -sign) * 1e-3 * (1 + random.NextDouble());
                if (Math.Abs(c) > 2)
                {
                    continue;
                }

                var truth = (4 * b * b * b) + (27 * c * c) < 0 ? 3 : 1;
                var answer = resolver.Ask([b, c]);
                across += answer.PredictedLabel != truth ? 1 : 0;
                Assert.True(answer.RealCount == truth, $"at ({b}, {c}): {answer.Method} from {answer.StartSample} gave {answer.RealCount}, the discriminant says {truth}; {string.Join(" / ", answer.Rejections)}");
            }
        }

        // The construction must really have produced queries whose nearest sample is on the other side.
        Assert.True(across > 0, "no query had its nearest sample across the locus");
    }

    [Fact]
    public void A_neighbour_with_more_real_solutions_answers_where_the_nearest_sample_has_fewer()
    {
        // Just inside the cubic's three-root region the nearest sample often lies outside with one root. Certified
        // distinct real endpoints bound the count from below, so the resolver starts from the neighbour with the most
        // roots: it must reach all three (the discriminant rule 4b³ + 27c² < 0 is the reference), never fewer.
        using var atlas = new TempAtlas("more");
        using var store = atlas.Open();
        var snapshot = SweepCubic(store, "more.db");
        var resolver = AtlasResolver.Create(store, snapshot);
        var raised = 0;
        foreach (var (b, c) in NearCubicLocus(seed: 23, outside: false))
        {
            var answer = resolver.Ask([b, c]);
            Assert.True(answer.RealCount == 3, $"at ({b}, {c}): {answer.Method} gave {answer.RealCount}, the discriminant says 3");
            raised += answer.Method == "real-track" && answer.PredictedLabel == 1 ? 1 : 0;
        }

        Assert.True(raised > 0, "no query inside the region was answered from a neighbour with more roots than the nearest sample");
    }

    [Fact]
    public void Just_outside_a_fold_the_count_comes_around_the_fold_and_from_the_other_side()
    {
        // Just outside the cubic's three-root region a neighbour inside still has three roots; tracked straight to
        // the query, two of them meet at the fold. The answer must then come from the detour around the fold and a
        // one-root neighbour agreeing, and equal the discriminant rule's count, 1.
        using var atlas = new TempAtlas("outside");
        using var store = atlas.Open();
        var snapshot = SweepCubic(store, "outside.db");
        var resolver = AtlasResolver.Create(store, snapshot);
        var strict = AtlasResolver.Create(store, snapshot, options: ResolveOptions.Default with { TwoSided = false });
        var aroundFold = 0;
        foreach (var (b, c) in NearCubicLocus(seed: 29, outside: true))
        {
            var answer = resolver.Ask([b, c]);
            Assert.True(answer.RealCount == 1, $"at ({b}, {c}): {answer.Method} gave {answer.RealCount}, the discriminant says 1");
            if (answer.Method == "real-track" && answer.Rejections.Any(r => r.Contains("real-only tracking failed", StringComparison.Ordinal)))
            {
                aroundFold++;
                Assert.Equal("full", strict.Ask([b, c]).Method);
            }
        }

        Assert.True(aroundFold > 0, "no query was answered around a fold");
    }

    [Fact]
    public void Across_a_stored_crossing_only_the_closest_pair_goes_around_and_a_neighbour_with_fewer_answers()
    {
        // Just outside the cubic's three-root region, the three-root neighbours lie across stored crossings. Their two
        // closest roots — the pair that meets at the fold — go around it alone, arrive non-real, and a one-root
        // neighbour on the query's side answers: two paths around (two legs each) and one real-only path, instead of
        // all three around. The count must still follow the discriminant rule, 1.
        using var atlas = new TempAtlas("pair");
        using var store = atlas.Open();
        var snapshot = SweepCubic(store, "pair.db");
        var resolver = AtlasResolver.Create(store, snapshot);
        var byPair = 0;
        foreach (var (b, c) in NearCubicLocus(seed: 31, outside: true))
        {
            var answer = resolver.Ask([b, c]);
            Assert.True(answer.RealCount == 1, $"at ({b}, {c}): {answer.Method} gave {answer.RealCount}, the discriminant says 1");
            var across = answer.Rejections.Any(r => r.Contains("a stored crossing lies between", StringComparison.Ordinal));
            byPair += answer.Method == "real-track" && across && answer.PathsTracked == (2 * 2) + 1 ? 1 : 0;
        }

        Assert.True(byPair > 0, "no query across a stored crossing was answered by the closest pair alone");
    }

    [Fact]
    public void Full_solves_from_relay_fibers_equal_full_solves_from_the_start_fiber()
    {
        using var atlas = new TempAtlas("microgrid3-relay");
        using var store = atlas.Open();
        var family = TestFamilies.Example("microgrid3");
        new SweepRunner(store).Run(family, new SweepOptions { Divisions = [4, 4], LinesPerTile = 4, MaxDegreeOfParallelism = 2 });
        var snapshot = AtlasSnapshot.Load(store, "microgrid3-relay.db");

        // No real-only attempts: every point inside the box is solved in full, from its cell's relay fiber.
        var relayed = AtlasResolver.Create(store, snapshot, options: ResolveOptions.Default with { Attempts = 0, RelayDivisions = 3 });
        var direct = AtlasResolver.Create(store, snapshot, options: ResolveOptions.Default with { Attempts = 0, RelayDivisions = 0 });
        var folds = snapshot.Crossings.Where(c => c.Crossing.Kind == CrossingKind.Fold).Select(c => c.Crossing).ToArray();
        Assert.NotEmpty(folds);
        var random = new Random(7);
        var fromRelays = 0;
        for (var i = 0; i < 300; i++)
        {
            var point = RandomPoint(family, folds, random, nearBoundary: i % 3 == 0);

            var answer = relayed.Ask(point);
            var reference = relayed.SolveFull(point);
            Assert.Equal("full", answer.Method);
            fromRelays += answer.StartSample!.StartsWith("relay fiber", StringComparison.Ordinal) ? 1 : 0;
            var real = reference.RealSolutions.ToArray();
            Assert.True(answer.RealCount == real.Length, $"at ({point[0]}, {point[1]}): from the {answer.StartSample} {answer.RealCount} real, from the start fiber {real.Length}");
            Assert.Equal(answer.Certified, reference.RealCountCertified);
            foreach (var solution in answer.Solutions)
            {
                Assert.Contains(real, r => Distance(r.Values, solution.Values) <= 1e-9 * (1 + Norm(r.Values)));
            }

            if (i % 10 == 0)
            {
                var plain = direct.Ask(point);
                Assert.Equal("family's start fiber", plain.StartSample);
                Assert.Equal(real.Length, plain.RealCount);
            }
        }

        // A relay that cannot finish hands its point to the start fiber; nearly all must finish.
        Assert.True(fromRelays >= 290, $"only {fromRelays} of 300 full solves came from relay fibers");

        // Relay fibers computed up front are the ones computed on first use: the same answers from a fresh resolver.
        var eager = AtlasResolver.Create(store, snapshot, options: ResolveOptions.Default with { Attempts = 0, RelayDivisions = 3 });
        Assert.Equal(9, eager.PrepareRelays());
        for (var i = 0; i < 20; i++)
        {
            var point = RandomPoint(family, folds, random, nearBoundary: false);
            var lazy = relayed.Ask(point);
            var prepared = eager.Ask(point);
            Assert.Equal(lazy.StartSample, prepared.StartSample);
            Assert.Equal(lazy.RealCount, prepared.RealCount);
            Assert.All(lazy.Solutions, s => Assert.Contains(prepared.Solutions, t => Distance(t.Values, s.Values) == 0));
        }
    }

    /// <summary>
    /// A point of the family's box: uniform, or within 1e-3 of the box width (per parameter) of a random stored fold.
    /// </summary>
    private static double[] RandomPoint(FiberWorkers.Algebra.Families.FamilyDefinition family, Crossing[] folds, Random random, bool nearBoundary)
    {
        var point = new double[family.Parameters.Count];
        for (var k = 0; k < point.Length; k++)
        {
            var p = family.Parameters[k];
            point[k] = nearBoundary
                ? Math.Clamp(folds[random.Next(folds.Length)].Point[k] + (2e-3 * p.Width * (random.NextDouble() - 0.5)), p.Low, p.High)
                : p.Low + (p.Width * random.NextDouble());
        }

        return point;
    }

    /// <summary>The cubic over 6×6 tiles with 8 lines each, swept into <paramref name="store"/> and loaded.</summary>
    private static AtlasSnapshot SweepCubic(SqliteAtlasStore store, string file)
    {
        new SweepRunner(store).Run(TestFamilies.Example("cubic"), new SweepOptions { Divisions = [6, 6], LinesPerTile = 8, MaxDegreeOfParallelism = 2 });
        return AtlasSnapshot.Load(store, file);
    }

    /// <summary>
    /// Up to 400 points 1e-3 to 2e-3 (in c) inside or outside the cubic's three-root region 4b³ + 27c² &lt; 0, on both
    /// branches, for b in [−1.8, −0.3] and |c| ≤ 2.
    /// </summary>
    private static IEnumerable<(double B, double C)> NearCubicLocus(int seed, bool outside)
    {
        var random = new Random(seed);
        for (var i = 0; i < 400; i++)
        {
            var b = -0.3 - (1.5 * random.NextDouble());
            var edge = Math.Sqrt(-4 * b * b * b / 27);
            var offset = 1e-3 * (1 + random.NextDouble());
            var c = (random.Next(2) == 0 ? -1 : 1) * (outside ? edge + offset : edge - offset);
            if (Math.Abs(c) <= 2)
            {
                yield return (b, c);
            }
        }
    }

    private static double Distance(Complex[] a, Complex[] b) => a.Zip(b).Max(z => (z.First - z.Second).Magnitude);

    private static double Norm(Complex[] a) => a.Max(v => v.Magnitude);
}
