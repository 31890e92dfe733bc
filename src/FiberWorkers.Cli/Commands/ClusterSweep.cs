using FiberWorkers.Algebra.Families;
using FiberWorkers.Atlas.Sweeps;
using FiberWorkers.Cluster.Client;
using FiberWorkers.Cluster.Contracts;
using FiberWorkers.Cluster.Security;
using FiberWorkers.Contracts.V1;
using Google.Protobuf;

namespace FiberWorkers.Cli.Commands;

/// <summary>A sweep submitted to a coordinator and followed to its commit (<c>fiber sweep --coordinator</c>).</summary>
internal static class ClusterSweep
{
    public static async Task<SweepSummary> RunAsync(Uri coordinator, ClientSecurity security, FamilyDefinition family, SweepOptions options, IProgress<SweepProgress> progress, CancellationToken cancellation)
    {
        using var client = new ClusterClient(coordinator, security: security);
        var request = new SubmitSweepRequest
        {
            FamilyJson = JsonFormatter.Default.Format(family.Message),
            Settings = Conversions.ToSettings(options),
            Source = Path.GetFileName(family.Source),
        };
        var outcome = await client.SweepAsync(request, new Relay(progress), cancellation).ConfigureAwait(false);
        return Conversions.ToSummary(outcome);
    }

    /// <summary>Shows the coordinator's updates with the worker count beside the stage.</summary>
    private sealed class Relay(IProgress<SweepProgress> inner) : IProgress<SweepProgressUpdate>
    {
        public void Report(SweepProgressUpdate value)
        {
            var live = value.Workers.Count(w => w.State == "live");
            inner.Report(new SweepProgress(
                $"{value.Stage} ({live} worker{(live == 1 ? string.Empty : "s")})",
                value.TilesDone,
                value.TilesPlanned,
                value.Samples,
                value.Crossings,
                value.TilesPerSecond,
                value.EtaSeconds >= 0 ? TimeSpan.FromSeconds(value.EtaSeconds) : null));
        }
    }
}
