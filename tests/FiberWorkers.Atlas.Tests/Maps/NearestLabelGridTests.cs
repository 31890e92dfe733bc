using CsCheck;
using FiberWorkers.Atlas.Maps;

namespace FiberWorkers.Atlas.Tests.Maps;

public sealed class NearestLabelGridTests
{
    [Fact]
    public void Nearest_agrees_with_brute_force_including_duplicates_ties_and_queries_outside_the_square()
    {
        Gen.Int[1, 400].SelectMany(n => Gen.Int[0, int.MaxValue].Select(seed => (n, seed)))
            .Sample(
                sample =>
                {
                    var random = new Random(sample.seed);
                    // Half the cases snap points to a coarse lattice: duplicates and exact ties on bucket edges.
                    var snap = random.Next(2) == 0;
                    var u = new double[sample.n];
                    var v = new double[sample.n];
                    for (var i = 0; i < sample.n; i++)
                    {
                        u[i] = Draw(random, snap);
                        v[i] = Draw(random, snap);
                    }

                    var grid = new NearestLabelGrid(u, v);
                    for (var query = 0; query < 50; query++)
                    {
                        var qu = (random.NextDouble() * 1.4) - 0.2;
                        var qv = snap ? Draw(random, snap: true) : (random.NextDouble() * 1.4) - 0.2;
                        Assert.Equal(BruteForce(u, v, qu, qv), grid.Nearest(qu, qv));
                    }
                },
                iter: 300,
                seed: "0N0XIzNsQ0O2");
    }

    [Fact]
    public void A_single_point_is_everyones_nearest()
    {
        var grid = new NearestLabelGrid([0.3], [0.9]);
        Assert.Equal(0, grid.Nearest(0, 0));
        Assert.Equal(0, grid.Nearest(5, -5));
    }

    private static double Draw(Random random, bool snap) => snap ? random.Next(0, 9) / 8.0 : random.NextDouble();

    /// <summary>The reference: every point, lowest index on ties.</summary>
    private static int BruteForce(double[] u, double[] v, double qu, double qv)
    {
        var best = -1;
        var bestDistance = double.PositiveInfinity;
        for (var i = 0; i < u.Length; i++)
        {
            var distance = ((u[i] - qu) * (u[i] - qu)) + ((v[i] - qv) * (v[i] - qv));
            if (distance < bestDistance)
            {
                best = i;
                bestDistance = distance;
            }
        }

        return best;
    }
}
