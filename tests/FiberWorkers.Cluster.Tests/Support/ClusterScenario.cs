using System.Collections.Concurrent;
using FiberWorkers.Algebra.Families;
using FiberWorkers.Atlas.Stores;
using FiberWorkers.Atlas.Sweeps;
using FiberWorkers.Cluster.Client;
using FiberWorkers.Cluster.Contracts;
using FiberWorkers.Contracts.V1;
using FiberWorkers.Testing;
using Google.Protobuf;

namespace FiberWorkers.Cluster.Tests.Support;

/// <summary>
/// The sweep the fault tests run: our reaction network (two parameters) on a 6×6 grid with 30 lines per tile, about
/// 0.05–0.2 s per tile on one core here, so a sweep takes a few seconds and a worker can be killed mid-tile.
/// </summary>
internal static class ClusterScenario
{
    private static readonly ConcurrentDictionary<string, Lazy<string>> References = new(StringComparer.Ordinal);

    public static FamilyDefinition Family { get; } = TestFamilies.Example("reaction-switch");

    public static SweepOptions Options { get; } = new() { Divisions = [6, 6], LinesPerTile = 30, Seed = 11, MaxDegreeOfParallelism = 2 };

    public static SubmitSweepRequest Request(SweepOptions? options = null) => new()
    {
        FamilyJson = JsonFormatter.Default.Format(Family.Message),
        Settings = Conversions.ToSettings(options ?? Options),
        Source = "reaction-switch.json",
    };

    /// <summary>The content hash of the same sweep run embedded, in this process (computed once per options).</summary>
    public static string ReferenceHash(SweepOptions? options = null)
    {
        var settings = options ?? Options;
        return References.GetOrAdd(settings.CanonicalText, _ => new Lazy<string>(() =>
        {
            using var directory = new TempDirectory();
            using var store = SqliteAtlasStore.Open(directory.File("embedded.db"));
            return new SweepRunner(store).Run(Family, settings).ContentHash;
        })).Value;
    }

    /// <summary>Polls until <paramref name="condition"/> holds; fails the test after <paramref name="timeout"/>.</summary>
    public static async Task WaitUntil(Func<Task<bool>> condition, TimeSpan timeout, string what)
    {
        var deadline = DateTime.UtcNow + timeout;
        while (DateTime.UtcNow < deadline)
        {
            if (await condition())
            {
                return;
            }

            await Task.Delay(50);
        }

        throw new TimeoutException($"waited {timeout.TotalSeconds:F0} s for {what}");
    }

    public static async Task<IReadOnlyList<WorkerState>> Workers(ClusterClient client) =>
        (await client.Coordinator.ListWorkersAsync(new ListWorkersRequest())).Workers;
}

/// <summary>A temporary directory removed at the end.</summary>
internal sealed class TempDirectory : IDisposable
{
    public TempDirectory() => Path = Directory.CreateTempSubdirectory("fiber-cluster-").FullName;

    public string Path { get; }

    public string File(string name) => System.IO.Path.Combine(Path, name);

    public void Dispose()
    {
        try
        {
            Directory.Delete(Path, recursive: true);
        }
        catch (IOException)
        {
            // A child process may still hold a file for a moment; the OS cleans temp.
        }
    }
}
