using System.Security.Cryptography.X509Certificates;
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
using FiberWorkers.Testing;
using Google.Protobuf;
using Serilog;
using Serilog.Core;
using Serilog.Events;
using Serilog.Formatting.Compact;

namespace FiberWorkers.Cluster.Tests.Security;

/// <summary>
/// A coordinator and one worker in this process, over loopback, with the tokens below (every role alone, all roles,
/// two tenants) and optionally TLS or mutual TLS from a <see cref="CertificateKit"/> made for the test. Every log
/// event of both servers is kept as a compact JSON line in <see cref="Log"/>.
/// </summary>
internal sealed class SecureCluster : IAsyncDisposable
{
    /// <summary>Token values by name; each is 43 characters, as <see cref="CertificateKit.NewToken"/> makes them.</summary>
    public static readonly IReadOnlyDictionary<string, string> Tokens = new Dictionary<string, string>(StringComparer.Ordinal)
    {
        ["submitter"] = CertificateKit.NewToken(),
        ["reader"] = CertificateKit.NewToken(),
        ["workers"] = CertificateKit.NewToken(),
        ["everything"] = CertificateKit.NewToken(),
        ["acme"] = CertificateKit.NewToken(),
        ["globex"] = CertificateKit.NewToken(),
    };

    /// <summary>Three tiles' worth of the depressed cubic: a sweep of a second or two.</summary>
    public static readonly SweepOptions TinySweep = new() { Divisions = [2, 2], LinesPerTile = 2, Seed = 3, MaxDegreeOfParallelism = 1 };

    private readonly TempDirectory _directory;
    private readonly SqliteAtlasStore _ledger;
    private readonly Logger _logger;
    private readonly LogCapture _capture;
    private readonly string? _serverName;

    private SecureCluster(TempDirectory directory, SqliteAtlasStore ledger, Logger logger, LogCapture capture, CoordinatorServer coordinator, WorkerServer worker, CertificateKit? kit, string? serverName)
    {
        _serverName = serverName;
        _directory = directory;
        _ledger = ledger;
        _logger = logger;
        _capture = capture;
        Coordinator = coordinator;
        Worker = worker;
        Kit = kit;
    }

    public CoordinatorServer Coordinator { get; }

    public WorkerServer Worker { get; }

    /// <summary>The test's certificates (null without TLS).</summary>
    public CertificateKit? Kit { get; }

    /// <summary>Every log event so far, one compact JSON line each.</summary>
    public string Log => _capture.Text;

    /// <summary>The token file of both servers: digests only, two tenants.</summary>
    public static string TokenFileJson() =>
        "{\"tokens\": [" + string.Join(", ",
            Entry("submitter", null, Roles.Submit),
            Entry("reader", null, Roles.Query),
            Entry("workers", null, Roles.Worker),
            Entry("everything", null, Roles.Submit, Roles.Query, Roles.Worker),
            Entry("acme", "acme", Roles.Submit, Roles.Query),
            Entry("globex", "globex", Roles.Submit, Roles.Query)) + "]}";

    /// <param name="tls">Serve (and call) with TLS.</param>
    /// <param name="mutual">Require client certificates of the test CA (with <paramref name="tls"/>).</param>
    /// <param name="serverName">The only name the server certificate carries (every channel then checks it instead of 127.0.0.1).</param>
    public static async Task<SecureCluster> StartAsync(bool tls = false, bool mutual = false, string? serverName = null)
    {
        var directory = new TempDirectory();
        var capture = new LogCapture();
        var logger = new LoggerConfiguration().MinimumLevel.Verbose().WriteTo.Sink(capture).CreateLogger();
        var kit = tls ? CertificateKit.Create(serverName is null ? ["localhost", "127.0.0.1"] : [serverName], 1) : null;
        var tokens = TokenTable.Parse(TokenFileJson(), "test tokens");
        var roots = kit is null ? null : new X509Certificate2Collection(kit.Authority);
        ServerTls? serverTls = kit is null ? null : ServerTls.FromCertificates(kit.Server, mutual ? roots : null);
        var coordinatorSecurity = new ServerSecurity
        {
            Tls = serverTls,
            Tokens = tokens,
            Outbound = new ClientSecurity(roots, mutual ? kit!.Server : null, Tokens["workers"], serverName),
        };
        var workerSecurity = coordinatorSecurity with { Outbound = new ClientSecurity(roots, mutual ? kit!.Client : null, Tokens["workers"], serverName) };
        var ledger = SqliteAtlasStore.Open(directory.File("cluster.db"));
        var listen = ListenAddress.Parse("127.0.0.1:0", "test");
        var coordinator = await CoordinatorServer.StartAsync(ledger, CoordinatorOptions.Default with { StartFiberThreads = 1, Security = coordinatorSecurity }, listen, logger);
        var worker = await WorkerServer.StartAsync(new WorkerOptions { Coordinator = coordinator.Address, Threads = 1, Id = "secure-0", Security = workerSecurity }, listen, logger);
        var cluster = new SecureCluster(directory, ledger, logger, capture, coordinator, worker, kit, serverName);
        using var client = cluster.Client("everything");
        await ClusterScenario.WaitUntil(async () => (await ClusterScenario.Workers(client)).Count == 1, TimeSpan.FromSeconds(20), "the worker to register");
        return cluster;
    }

    /// <summary>Client settings with the named token (null: none), the test CA's roots and, when asked, the client certificate.</summary>
    public ClientSecurity Security(string? token, bool certificate = true) =>
        new(Kit is null ? null : new X509Certificate2Collection(Kit.Authority), certificate ? Kit?.Client : null, token is null ? null : Tokens[token], _serverName);

    public ClusterClient Client(string? token, bool certificate = true) => new(Coordinator.Address, security: Security(token, certificate));

    /// <summary>The cubic's tiny sweep.</summary>
    public static SubmitSweepRequest SweepRequest() => new()
    {
        FamilyJson = JsonFormatter.Default.Format(TestFamilies.Example("cubic").Message),
        Settings = Conversions.ToSettings(TinySweep),
        Source = "cubic.json",
    };

    public async ValueTask DisposeAsync()
    {
        await Worker.DisposeAsync();
        await Coordinator.DisposeAsync();
        _ledger.Dispose();
        await _logger.DisposeAsync();
        Kit?.Dispose();
        _directory.Dispose();
    }

    private static string Entry(string name, string? tenant, params string[] roles) =>
        $"{{\"name\": \"{name}\", \"sha256\": \"{TokenTable.Digest(Tokens[name])}\", \"roles\": [{string.Join(", ", roles.Select(r => $"\"{r}\""))}]"
        + (tenant is null ? "}" : $", \"tenant\": \"{tenant}\"}}");

    /// <summary>Keeps every event as a compact JSON line (message, properties, exception).</summary>
    private sealed class LogCapture : ILogEventSink
    {
        private readonly CompactJsonFormatter _formatter = new();
        private readonly StringWriter _text = new();
        private readonly Lock _gate = new();

        public string Text
        {
            get
            {
                lock (_gate)
                {
                    return _text.ToString();
                }
            }
        }

        public void Emit(LogEvent logEvent)
        {
            lock (_gate)
            {
                _formatter.Format(logEvent, _text);
            }
        }
    }
}
