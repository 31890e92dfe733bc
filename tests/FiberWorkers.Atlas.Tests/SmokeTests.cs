using FiberWorkers.Atlas.Stores;
using FiberWorkers.Atlas.Sweeps;
using FiberWorkers.Testing;

namespace FiberWorkers.Atlas.Tests;

public sealed class SmokeTests
{
    [Fact]
    public void A_small_cubic_sweep_commits_a_version_whose_labels_are_one_and_three()
    {
        var path = Path.Combine(Path.GetTempPath(), $"fiber-smoke-{Guid.NewGuid():N}.db");
        try
        {
            using var store = SqliteAtlasStore.Open(path);
            var family = TestFamilies.Example("cubic");
            var summary = new SweepRunner(store).Run(family, new SweepOptions { Divisions = [2, 2], LinesPerTile = 2 });
            Assert.Equal(1, summary.AtlasVersion);
            Assert.Equal(4, summary.Tiles);
            // x³ + bx + c has 1 or 3 real roots away from its discriminant (any algebra text).
            Assert.All(summary.Labels.Keys, label => Assert.Contains(label, new[] { 1, 3 }));
        }
        finally
        {
            foreach (var file in Directory.GetFiles(Path.GetTempPath(), Path.GetFileName(path) + "*"))
            {
                File.Delete(file);
            }
        }
    }
}
