using FiberWorkers.Atlas.Tiles;

namespace FiberWorkers.Atlas.Tests.Support;

/// <summary>The level-0 keys of a grid, in any number of axes.</summary>
internal static class TileGrid
{
    public static IEnumerable<TileKey> LevelZero(IReadOnlyList<int> divisions)
    {
        var total = divisions.Aggregate(1, (product, d) => product * d);
        for (var index = 0; index < total; index++)
        {
            var coordinates = new int[divisions.Count];
            var rest = index;
            for (var k = divisions.Count - 1; k >= 0; k--)
            {
                coordinates[k] = rest % divisions[k];
                rest /= divisions[k];
            }

            yield return new TileKey(0, coordinates);
        }
    }
}
