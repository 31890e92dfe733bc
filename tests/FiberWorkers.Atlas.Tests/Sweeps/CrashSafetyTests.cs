using System.Diagnostics;
using FiberWorkers.Atlas.Stores;
using FiberWorkers.Atlas.Sweeps;
using FiberWorkers.Atlas.Tests.Support;
using FiberWorkers.Testing;

namespace FiberWorkers.Atlas.Tests.Sweeps;

/// <summary>
/// `fiber sweep` killed mid-way (issue 5): the atlas file still opens, every committed version is intact, and the
/// rerun of the same command finishes to the content hash of an uninterrupted sweep.
/// </summary>
public sealed class CrashSafetyTests
{
    private static readonly TimeSpan Limit = TimeSpan.FromMinutes(3);

    [Fact]
    public void A_killed_sweep_leaves_a_readable_atlas_and_its_rerun_matches_an_uninterrupted_sweep()
    {
        using var atlas = new TempAtlas();
        using var reference = new TempAtlas("reference");
        string[] Sweep(string file, int tiles, int lines, int threads) =>
            ["sweep", "--example", "microgrid3", "--atlas", file, "--tiles", $"{tiles}x{tiles}", "--lines", $"{lines}", "--seed", "5", "--threads", $"{threads}", "--json"];

        // Version 1: a small sweep that completes.
        var first = FiberProcess.Run(Limit, Sweep(atlas.Path, 2, 1, 2));
        Assert.True(first.ExitCode == 0, first.Error);
        var firstHash = FiberProcess.Summary(first.Output).GetProperty("contentHash").GetString();

        // A long sweep (64 tiles), killed once a few of its tiles are stored.
        int stored;
        using (var child = FiberProcess.Start(Sweep(atlas.Path, 8, 4, 2)))
        {
            var clock = Stopwatch.StartNew();
            stored = 0;
            while (stored < 6 && !child.HasExited && clock.Elapsed < Limit)
            {
                Thread.Sleep(25);
                stored = RunningTiles(atlas.Path);
            }

            Assert.False(child.HasExited, $"the sweep ended (exit {(child.HasExited ? child.ExitCode : 0)}) before it could be killed: {child.Error}");
            child.Kill();
        }

        // The file opens, holds only version 1, unchanged, and its tiles pass their checksums.
        Assert.Equal("ok", RawSqlite.Text(atlas.Path, "PRAGMA integrity_check"));
        using (var store = SqliteAtlasStore.Open(atlas.Path, create: false))
        {
            var versions = store.Versions(store.Atlases().Single());
            var only = Assert.Single(versions);
            Assert.Equal(firstHash, only.ContentHash);
            var snapshot = AtlasSnapshot.Load(store, atlas.Path, version: 1);
            Assert.Equal(4, snapshot.Tiles.Count);
        }

        var partial = RunningTiles(atlas.Path);
        Assert.InRange(partial, stored, 63);

        // The rerun continues with the missing tiles and commits version 2.
        var rerun = FiberProcess.Run(Limit, Sweep(atlas.Path, 8, 4, 2));
        Assert.True(rerun.ExitCode == 0, rerun.Error);
        var resumed = FiberProcess.Summary(rerun.Output);

        var fresh = FiberProcess.Run(Limit, Sweep(reference.Path, 8, 4, 1));
        Assert.True(fresh.ExitCode == 0, fresh.Error);
        var uninterrupted = FiberProcess.Summary(fresh.Output);

        Assert.Equal(2, resumed.GetProperty("atlasVersion").GetInt32());
        Assert.Equal(64, resumed.GetProperty("tiles").GetInt32());
        Assert.Equal(uninterrupted.GetProperty("contentHash").GetString(), resumed.GetProperty("contentHash").GetString());
        Assert.Equal(uninterrupted.GetProperty("labels").ToString(), resumed.GetProperty("labels").ToString());
        using (var store = SqliteAtlasStore.Open(atlas.Path, create: false))
        {
            var versions = store.Versions(store.Atlases().Single());
            Assert.Equal([1, 2], versions.Select(v => v.Version));
            Assert.Equal(1, versions[1].Parent);
            Assert.Equal(firstHash, versions[0].ContentHash);
        }
    }

    [Fact]
    public void The_command_line_sweep_and_the_library_sweep_give_the_same_content_hash()
    {
        // Another process, the same inputs: the content hash is a function of the content only.
        using var cli = new TempAtlas("cli");
        using var library = new TempAtlas("library");
        var run = FiberProcess.Run(Limit, "sweep", "--example", "cubic", "--atlas", cli.Path, "--tiles", "3x3", "--lines", "2", "--seed", "7", "--threads", "1", "--json");
        Assert.True(run.ExitCode == 0, run.Error);
        var summary = FiberProcess.Summary(run.Output);

        using var store = library.Open();
        var local = new SweepRunner(store).Run(
            TestFamilies.Example("cubic"), new SweepOptions { Divisions = [3, 3], LinesPerTile = 2, Seed = 7, MaxDegreeOfParallelism = 2 });

        foreach (var key in new[] { "atlasVersion", "tiles", "samples", "crossings", "labels", "contentHash", "atlasId" })
        {
            Assert.True(summary.TryGetProperty(key, out _), $"the --json summary lacks '{key}': {run.Output}");
        }

        Assert.Equal(local.ContentHash, summary.GetProperty("contentHash").GetString());
        Assert.Equal(local.AtlasId, summary.GetProperty("atlasId").GetString());
        Assert.Equal(local.Samples, summary.GetProperty("samples").GetInt64());
        Assert.Equal(local.Crossings, summary.GetProperty("crossings").GetInt64());
        foreach (var (label, count) in local.Labels)
        {
            Assert.Equal(count, summary.GetProperty("labels").GetProperty($"{label}").GetInt64());
        }
    }

    /// <summary>Tiles stored so far by the running sweep, read through a read-only connection (0 before it starts).</summary>
    private static int RunningTiles(string path)
    {
        if (!File.Exists(path))
        {
            return 0;
        }

        try
        {
            return (int)RawSqlite.Scalar(
                path, "SELECT COUNT(*) FROM sweep_tiles WHERE sweep_id IN (SELECT sweep_id FROM sweeps WHERE state = 'running')", readOnly: true);
        }
        catch (Microsoft.Data.Sqlite.SqliteException)
        {
            // The writer may hold the file between its first transactions; try again on the next poll.
            return 0;
        }
    }
}
