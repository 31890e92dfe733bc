using FiberWorkers.Algebra.Families;
using FiberWorkers.Atlas.Stores;
using FiberWorkers.Atlas.Sweeps;
using FiberWorkers.Testing;

namespace FiberWorkers.Atlas.Tests.Exports;

/// <summary>
/// Small swept atlases shared by the export and map tests, swept once per test run and held in memory (the
/// snapshot holds every tile, so the file is deleted right after loading).
/// </summary>
internal static class SmallAtlases
{
    /// <summary>x² − a − b·c over [−1, 1]³: 2 real solutions where a + bc &gt; 0, none elsewhere.</summary>
    private static readonly FamilyDefinition SlabFamily =
        TestFamilies.Build("slab test", ["x"], ["x^2 - a - b*c"], [("a", -1, 1), ("b", -1, 1), ("c", -1, 1)]);

    private static readonly Lazy<AtlasSnapshot> CubicSnapshot = new(() => Sweep(TestFamilies.Example("cubic"), [4, 4], 2));

    private static readonly Lazy<AtlasSnapshot> SlabSnapshot = new(() => Sweep(SlabFamily, [2, 2, 2], 2));

    /// <summary>The depressed cubic x³ + bx + c over b ∈ [−3, 1], c ∈ [−2, 2]: 4×4 tiles, 2 lines each.</summary>
    public static AtlasSnapshot Cubic => CubicSnapshot.Value;

    /// <summary>
    /// x² − a − b·c over [−1, 1]³: 2 real solutions where a + bc &gt; 0, none elsewhere (three parameters, for slabs);
    /// 2×2×2 tiles, 2 lines each.
    /// </summary>
    public static AtlasSnapshot Slab => SlabSnapshot.Value;

    /// <summary>Sweeps a family into a fresh file and loads the version.</summary>
    public static AtlasSnapshot Sweep(FamilyDefinition family, int[] divisions, int lines)
    {
        var folder = Directory.CreateTempSubdirectory("fiber-exports-maps-");
        try
        {
            using var store = SqliteAtlasStore.Open(Path.Combine(folder.FullName, "atlas.db"));
            new SweepRunner(store).Run(family, new SweepOptions { Divisions = divisions, LinesPerTile = lines, MaxDegreeOfParallelism = 2 });
            return AtlasSnapshot.Load(store, "atlas.db");
        }
        finally
        {
            folder.Delete(recursive: true);
        }
    }

    /// <summary>A fresh directory, deleted on dispose.</summary>
    public static TemporaryFolder Folder() => new(Directory.CreateTempSubdirectory("fiber-exports-maps-").FullName);
}

/// <summary>A directory deleted with everything in it on dispose.</summary>
internal sealed class TemporaryFolder(string path) : IDisposable
{
    public string Path { get; } = path;

    public void Dispose()
    {
        try
        {
            Directory.Delete(Path, recursive: true);
        }
        catch (IOException)
        {
            // Left for the system's temp cleaning; the name is unique.
        }
    }
}
