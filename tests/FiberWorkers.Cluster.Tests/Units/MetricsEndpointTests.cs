using System.Globalization;
using System.Net;
using System.Text.RegularExpressions;
using FiberWorkers.Atlas.Stores;
using FiberWorkers.Atlas.Sweeps;
using FiberWorkers.Cluster.Client;
using FiberWorkers.Cluster.Contracts;
using FiberWorkers.Cluster.Coordination;
using FiberWorkers.Cluster.Hosting;
using FiberWorkers.Cluster.Security;
using FiberWorkers.Cluster.Tests.Support;
using FiberWorkers.Cluster.Workers;
using FiberWorkers.Contracts.V1;
using FiberWorkers.Solving.Randomness;
using FiberWorkers.Testing;
using Google.Protobuf;
using Grpc.Core;
using Grpc.Net.Client;

namespace FiberWorkers.Cluster.Tests.Units;

/// <summary>
/// The admin listener of an in-process coordinator (two workers in the same process, so its scrape holds their series
/// too): after a small sweep and some asks, /metrics in Prometheus text format counts exactly what happened.
/// </summary>
public sealed partial class MetricsEndpointTests
{
    private static readonly SweepOptions Options = new() { Divisions = [3, 3], LinesPerTile = 6, Seed = 21, MaxDegreeOfParallelism = 1 };

    [Fact]
    public async Task Metrics_after_a_sweep_and_asks_count_the_tiles_paths_workers_and_resolves()
    {
        using var directory = new TempDirectory();
        await using var log = new Serilog.LoggerConfiguration().CreateLogger();
        using var ledger = SqliteAtlasStore.Open(directory.File("cluster.db"));
        var listen = ListenAddress.Parse("127.0.0.1:0", "test");
        var options = CoordinatorOptions.Default with { StartFiberThreads = 2, AdminListen = ListenAddress.Parse("127.0.0.1:0", "admin") };
        var coordinator = await CoordinatorServer.StartAsync(ledger, options, listen, log);
        var workers = new List<WorkerServer>();
        try
        {
            for (var i = 0; i < 2; i++)
            {
                workers.Add(await WorkerServer.StartAsync(new WorkerOptions { Coordinator = coordinator.Address, Threads = 1, Id = $"metrics-{i}" }, listen, log));
            }

            using var client = new ClusterClient(coordinator.Address);
            await ClusterScenario.WaitUntil(async () => (await ClusterScenario.Workers(client)).Count == 2, TimeSpan.FromSeconds(20), "two workers");
            var family = TestFamilies.Example("two-link-arm");
            var request = new SubmitSweepRequest { FamilyJson = JsonFormatter.Default.Format(family.Message), Settings = Conversions.ToSettings(Options) };
            var outcome = await client.SweepAsync(request).WaitAsync(TimeSpan.FromSeconds(120));

            const int asks = 12;
            var random = new SeededRandom(9);
            var methods = new Dictionary<string, int>(StringComparer.Ordinal);
            long askPaths = 0;
            for (var i = 0; i < asks; i++)
            {
                var ask = new AskRequest { AtlasId = outcome.AtlasId, RequestId = $"m{i}" };
                ask.Point.Add(family.Parameters.Select(p => p.Low + (p.Width * random.NextDouble())));
                var reply = await client.AskAsync(ask);
                methods[reply.Method] = methods.GetValueOrDefault(reply.Method) + 1;
                askPaths += reply.PathsTracked;
            }

            Assert.NotNull(coordinator.AdminAddress);
            using var http = new HttpClient { BaseAddress = coordinator.AdminAddress };
            using var response = await http.GetAsync(new Uri("/metrics", UriKind.Relative));
            Assert.Equal(HttpStatusCode.OK, response.StatusCode);
            Assert.StartsWith("text/plain", response.Content.Headers.ContentType?.MediaType, StringComparison.Ordinal);
            var samples = Parse(await response.Content.ReadAsStringAsync());

            Assert.Equal(9, outcome.Tiles);
            Assert.Equal(outcome.Tiles, Sum(samples, "fiberworkers_tiles_total", "outcome", "merged"));
            Assert.Equal(0, Sum(samples, "fiberworkers_tiles_total", "outcome", "failed"));
            Assert.Equal(outcome.Tiles, Sum(samples, "fiberworkers_worker_tiles_total", "outcome", "computed"));
            Assert.Equal(outcome.PathsTracked, Sum(samples, "fiberworkers_paths_total", "work", "tile"));
            Assert.True(outcome.PathsTracked > 0);
            Assert.Equal(askPaths, Sum(samples, "fiberworkers_paths_total", "work", "resolve"));
            Assert.Equal(2, Sum(samples, "fiberworkers_workers"));

            // Every ask was resolved once by one worker: the histogram's count, its +Inf bucket and the method counter agree.
            Assert.Equal(asks, Sum(samples, "fiberworkers_resolve_duration_seconds_count"));
            Assert.Equal(asks, Sum(samples, "fiberworkers_resolve_duration_seconds_bucket", "le", "+Inf"));
            Assert.Equal(asks, Sum(samples, "fiberworkers_resolves_total"));
            foreach (var (method, count) in methods)
            {
                Assert.Equal(count, Sum(samples, "fiberworkers_resolves_total", "method", method));
            }

            var seconds = Sum(samples, "fiberworkers_resolve_duration_seconds_sum");
            Assert.InRange(seconds, 1e-6 * asks, 120);
            var bounds = samples.Where(s => s.Name == "fiberworkers_resolve_duration_seconds_bucket").Select(s => s.Labels["le"]).Distinct().ToList();
            Assert.Equal(ClusterMetrics.ResolveBuckets.Length + 1, bounds.Count);

            // Queue gauges: one series per worker, empty now that every call was answered.
            Assert.Equal(2, samples.Count(s => s.Name == "fiberworkers_ask_queue"));
            Assert.Equal(2, samples.Count(s => s.Name == "fiberworkers_resolve_queue"));
            Assert.Equal(0, Sum(samples, "fiberworkers_ask_queue") + Sum(samples, "fiberworkers_resolve_queue") + Sum(samples, "fiberworkers_tiles_in_flight"));

            // Health on the admin port; nothing else there, and no admin paths on the gRPC port.
            Assert.Equal("ok\n", await http.GetStringAsync(new Uri("/healthz", UriKind.Relative)));
            using (var other = await http.GetAsync(new Uri("/fiberworkers.v1.Coordinator/ListWorkers", UriKind.Relative)))
            {
                Assert.Equal(HttpStatusCode.NotFound, other.StatusCode);
            }

            using (var channel = GrpcChannel.ForAddress(coordinator.AdminAddress))
            {
                var viaAdmin = new Coordinator.CoordinatorClient(channel);
                await Assert.ThrowsAsync<RpcException>(async () => await viaAdmin.ListWorkersAsync(new ListWorkersRequest(), deadline: DateTime.UtcNow.AddSeconds(10)));
            }

            using var h2 = new HttpClient { BaseAddress = coordinator.Address, DefaultRequestVersion = HttpVersion.Version20, DefaultVersionPolicy = HttpVersionPolicy.RequestVersionExact };
            using (var onGrpcPort = await h2.GetAsync(new Uri("/metrics", UriKind.Relative)))
            {
                Assert.Equal(HttpStatusCode.NotFound, onGrpcPort.StatusCode);
            }
        }
        finally
        {
            foreach (var worker in workers)
            {
                await worker.DisposeAsync();
            }

            await coordinator.DisposeAsync();
        }
    }

    [Fact]
    public async Task The_admin_listener_is_served_with_the_servers_TLS_and_refused_off_loopback_without_it()
    {
        using var directory = new TempDirectory();
        await using var log = new Serilog.LoggerConfiguration().CreateLogger();
        using var ledger = SqliteAtlasStore.Open(directory.File("cluster.db"));
        var listen = ListenAddress.Parse("127.0.0.1:0", "test");
        using var kit = CertificateKit.Create(["localhost", "127.0.0.1"], 1);
        var security = new ServerSecurity { Tls = ServerTls.FromCertificates(kit.Server), InsecureNoAuth = true };
        var coordinator = await CoordinatorServer.StartAsync(
            ledger, CoordinatorOptions.Default with { Security = security, AdminListen = ListenAddress.Parse("127.0.0.1:0", "admin") }, listen, log);
        try
        {
            Assert.Equal("https", coordinator.AdminAddress!.Scheme);
            using var handler = new HttpClientHandler { ServerCertificateCustomValidationCallback = (_, certificate, _, _) => certificate?.Thumbprint == kit.Server.Thumbprint };
            using var https = new HttpClient(handler) { BaseAddress = coordinator.AdminAddress };
            var text = await https.GetStringAsync(new Uri("/metrics", UriKind.Relative));
            Assert.Contains("fiberworkers_workers", text, StringComparison.Ordinal);

            // The same port in plaintext does not answer.
            using var plain = new HttpClient { BaseAddress = new UriBuilder(coordinator.AdminAddress) { Scheme = "http" }.Uri, Timeout = TimeSpan.FromSeconds(10) };
            await Assert.ThrowsAnyAsync<HttpRequestException>(() => plain.GetStringAsync(new Uri("/metrics", UriKind.Relative)));
        }
        finally
        {
            await coordinator.DisposeAsync();
        }

        var refused = await Assert.ThrowsAsync<InvalidOperationException>(() => CoordinatorServer.StartAsync(
            ledger, CoordinatorOptions.Default with { AdminListen = ListenAddress.Parse("0.0.0.0:0", "admin") }, listen, log));
        Assert.Contains("admin listener: 0.0.0.0:0 is not a loopback address", refused.Message, StringComparison.Ordinal);
    }

    [Fact]
    public async Task A_draining_worker_is_no_longer_counted_live_nor_given_asks()
    {
        using var directory = new TempDirectory();
        await using var log = new Serilog.LoggerConfiguration().CreateLogger();
        using var ledger = SqliteAtlasStore.Open(directory.File("cluster.db"));
        var listen = ListenAddress.Parse("127.0.0.1:0", "test");
        var coordinator = await CoordinatorServer.StartAsync(ledger, CoordinatorOptions.Default with { StartFiberThreads = 2 }, listen, log);
        try
        {
            var pool = coordinator.Workers;
            pool.Register("a", new Uri("http://127.0.0.1:1"), 1);
            pool.Register("b", new Uri("http://127.0.0.1:2"), 1);
            Assert.True(pool.Deregister("a", final: false));
            Assert.Equal(["b"], pool.Live().Select(w => w.Id));
            Assert.Equal(["a", "b"], pool.All().Select(w => w.Id));
            Assert.Equal("draining", pool.All()[0].State);
            Assert.False(pool.All()[0].Available);
            Assert.True(pool.Heartbeat("a"));
            Assert.True(pool.Deregister("a", final: true));
            Assert.Equal(["b"], pool.All().Select(w => w.Id));
            Assert.False(pool.Deregister("a", final: true));
        }
        finally
        {
            await coordinator.DisposeAsync();
        }
    }

    private sealed record Sample(string Name, IReadOnlyDictionary<string, string> Labels, double Value);

    private static double Sum(IEnumerable<Sample> samples, string name, string? label = null, string? value = null) =>
        samples.Where(s => s.Name == name && (label is null || (s.Labels.TryGetValue(label, out var v) && v == value))).Sum(s => s.Value);

    /// <summary>Prometheus text exposition format: <c>name{label="value",...} number [timestamp]</c>; comments skipped.</summary>
    private static List<Sample> Parse(string text)
    {
        var samples = new List<Sample>();
        foreach (var line in text.Split('\n', StringSplitOptions.RemoveEmptyEntries | StringSplitOptions.TrimEntries))
        {
            if (line.StartsWith('#'))
            {
                continue;
            }

            var match = SampleLine().Match(line);
            Assert.True(match.Success, $"not a Prometheus sample line: {line}");
            var labels = new Dictionary<string, string>(StringComparer.Ordinal);
            foreach (Match pair in LabelPair().Matches(match.Groups["labels"].Value))
            {
                labels[pair.Groups["key"].Value] = pair.Groups["value"].Value;
            }

            var number = match.Groups["value"].Value;
            var parsed = number switch
            {
                "+Inf" => double.PositiveInfinity,
                "-Inf" => double.NegativeInfinity,
                "NaN" => double.NaN,
                _ => double.Parse(number, NumberStyles.Float, CultureInfo.InvariantCulture),
            };
            samples.Add(new Sample(match.Groups["name"].Value, labels, parsed));
        }

        return samples;
    }

    [GeneratedRegex(@"^(?<name>[a-zA-Z_:][a-zA-Z0-9_:]*)(\{(?<labels>.*)\})?\s+(?<value>\S+)(\s+\d+)?$")]
    private static partial Regex SampleLine();

    [GeneratedRegex("(?<key>[a-zA-Z_][a-zA-Z0-9_]*)=\"(?<value>(?:[^\"\\\\]|\\\\.)*)\"")]
    private static partial Regex LabelPair();
}
