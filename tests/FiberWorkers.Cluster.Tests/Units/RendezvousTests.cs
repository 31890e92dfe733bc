using FiberWorkers.Cluster.Routing;

namespace FiberWorkers.Cluster.Tests.Units;

public sealed class RendezvousTests
{
    private static readonly string[] Tiles = [.. Enumerable.Range(0, 400).Select(i => $"L0:{i % 20},{i / 20}")];

    [Fact]
    public void Removing_a_worker_moves_only_the_tiles_it_owned_and_they_go_to_their_second_choice()
    {
        var workers = new[] { "w-a", "w-b", "w-c", "w-d", "w-e" };
        var before = Tiles.ToDictionary(t => t, t => Rendezvous.Order(t, workers, w => w));
        var remaining = workers.Where(w => w != "w-c").ToArray();
        foreach (var tile in Tiles)
        {
            var after = Rendezvous.Order(tile, remaining, w => w);
            var expected = before[tile].Where(w => w != "w-c").ToList();
            Assert.Equal(expected, after);
        }

        // Each worker owns a fair share: 400 tiles over 5 workers, 80 expected, binomial sd ≈ 8.
        var owners = Tiles.GroupBy(t => before[t][0]).ToDictionary(g => g.Key, g => g.Count());
        Assert.Equal(5, owners.Count);
        Assert.All(owners.Values, n => Assert.InRange(n, 45, 115));
    }

    [Fact]
    public void The_order_is_the_same_whatever_order_the_workers_are_listed_in()
    {
        var workers = new[] { "alpha", "beta", "gamma", "delta" };
        foreach (var tile in Tiles.Take(50))
        {
            Assert.Equal(Rendezvous.Order(tile, workers, w => w), Rendezvous.Order(tile, workers.Reverse(), w => w));
        }
    }

    [Fact]
    public void The_weight_is_the_first_eight_bytes_of_sha256_of_tile_newline_worker()
    {
        // SHA-256("L0:0,0\nw1") computed independently with `printf 'L0:0,0\nw1' | sha256sum` (coreutils).
        Assert.Equal(0x45aeaa61e6b8303bUL, Rendezvous.Weight("L0:0,0", "w1"));
    }
}
