using System.CommandLine;
using System.Globalization;
using FiberWorkers.Cluster.Coordination;
using FiberWorkers.Cluster.Hosting;
using FiberWorkers.Cluster.Stores;
using FiberWorkers.Cluster.Workers;

namespace FiberWorkers.Cli.Commands;

/// <summary>
/// <c>fiber serve coordinator --listen HOST:PORT --store sqlite:FILE|postgres:CONN</c> and
/// <c>fiber serve worker --listen HOST:PORT --coordinator URL [--threads K]</c>: the cluster's two servers. Both run
/// until SIGTERM or Ctrl+C, then stop gracefully (calls in flight finish).
/// </summary>
internal static class ServeCommand
{
    public static Command Create(TextWriter error)
    {
        var command = new Command("serve", "Run a cluster server: the coordinator or a worker.");
        command.Subcommands.Add(CreateCoordinator(error));
        command.Subcommands.Add(CreateWorker(error));
        return command;
    }

    private static Option<string> LogFormat()
    {
        var option = new Option<string>("--log-format") { Description = "auto (JSON lines unless on a terminal), json or text.", DefaultValueFactory = _ => "auto" };
        option.AcceptOnlyFromAmong("auto", "json", "text");
        return option;
    }

    private static Option<double> DrainTimeout() => new("--drain-timeout")
    {
        Description = "Seconds calls in flight may run on after SIGTERM before the server stops anyway.",
        DefaultValueFactory = _ => 20.0,
    };

    private static Option<string?> AdminListen() => new("--admin-listen")
    {
        Description = "Address (HOST:PORT) of the admin listener: HTTP/1.1 (with the server's TLS; off loopback only with TLS) serving /metrics (Prometheus text format), /healthz and /readyz, no gRPC. Default: none.",
    };

    private static Command CreateCoordinator(TextWriter error)
    {
        var listen = new Option<string>("--listen") { Description = "Address to listen on (HOST:PORT).", DefaultValueFactory = _ => "127.0.0.1:7400" };
        var store = new Option<string>("--store") { Description = "sqlite:FILE, postgres:CONNECTION-STRING or postgres:env:VARIABLE.", Required = true };
        var heartbeat = new Option<double>("--heartbeat") { Description = "Seconds between worker heartbeats; three missed ones mark a worker lost.", DefaultValueFactory = _ => 1.0 };
        var deadline = new Option<double>("--tile-deadline") { Description = "Seconds one attempt at a tile may take before it goes to another worker.", DefaultValueFactory = _ => 600.0 };
        var attempts = new Option<int>("--max-attempts") { Description = "Attempts at one tile before the sweep fails (it can be resumed).", DefaultValueFactory = _ => 12 };
        var askQueue = new Option<int>("--ask-queue") { Description = "Asks waiting per worker before new ones are refused.", DefaultValueFactory = _ => 256 };
        var threads = new Option<int>("--threads") { Description = "Threads for the start fibers the coordinator computes.", DefaultValueFactory = _ => Environment.ProcessorCount };
        var drain = DrainTimeout();
        var format = LogFormat();
        var admin = AdminListen();
        var command = new Command("coordinator", "Run the coordinator: owns sweeps and atlases, hands tiles to workers, routes asks.");
        foreach (var option in new Option[] { listen, store, heartbeat, deadline, attempts, askQueue, threads, drain, format, admin })
        {
            command.Options.Add(option);
        }

        var limits = ServeLimits.ForCoordinator();
        limits.AddTo(command);
        var security = new ServerSecurityArguments(new ClientSecurityArguments("--worker-token-file", "FIBER_WORKER_TOKEN", "presented to workers (a token with the worker role)"));
        security.AddTo(command);

        command.SetAction(async (parse, cancellation) =>
        {
            var address = Listen(parse.GetValue(listen)!);
            var options = CoordinatorOptions.Default with
            {
                Heartbeat = Seconds(parse.GetValue(heartbeat), 0.05, 60, "--heartbeat"),
                TileDeadline = Seconds(parse.GetValue(deadline), 0.1, 86_400, "--tile-deadline"),
                MaxTileAttempts = Range(parse.GetValue(attempts), 1, 1000, "--max-attempts"),
                AskQueuePerWorker = Range(parse.GetValue(askQueue), 1, 1_000_000, "--ask-queue"),
                StartFiberThreads = Range(parse.GetValue(threads), 1, 4096, "--threads"),
                DrainTimeout = Seconds(parse.GetValue(drain), 0, 86_400, "--drain-timeout"),
                AdminListen = Admin(parse.GetValue(admin), address),
            };
            var (requestLimits, messageBytes) = limits.Read(parse);
            options = options with { Limits = requestLimits, MaxMessageBytes = messageBytes };
            options = options with { Security = security.Resolve(parse, address) };
            CheckAdmin(options.AdminListen, options.Security);
            using var log = ServiceLogging.Create(parse.GetValue(format)!, "coordinator");
            using var ledger = LedgerStores.Open(parse.GetValue(store)!);

            // Store calls (merges, version lists) block pool threads for a moment; with the pool at its minimum (one
            // thread per core) every call behind them, refusals included, would wait for the pool to grow (~0.5 s).
            ThreadPool.GetMinThreads(out var poolThreads, out var ioThreads);
            ThreadPool.SetMinThreads(Math.Max(poolThreads, 32), ioThreads);
            var server = await Start(() => CoordinatorServer.StartAsync(ledger, options, address, log, cancellation), address, error).ConfigureAwait(false);
            await using (server.ConfigureAwait(false))
            {
                await Until(server.Stopped, cancellation).ConfigureAwait(false);
                log.Information("coordinator stopping");
            }

            return CommandLine.Success;
        });
        return command;
    }

    private static Command CreateWorker(TextWriter error)
    {
        var listen = new Option<string>("--listen") { Description = "Address to listen on (HOST:PORT; port 0 picks a free one).", DefaultValueFactory = _ => "127.0.0.1:0" };
        var coordinator = new Option<string>("--coordinator") { Description = "The coordinator's address, e.g. http://127.0.0.1:7400.", Required = true };
        var advertise = new Option<string?>("--advertise") { Description = "The address others call this worker at (default: the bound address)." };
        var threads = new Option<int>("--threads") { Description = "Tiles computed and resolves answered at once.", DefaultValueFactory = _ => Environment.ProcessorCount };
        var resolveQueue = new Option<int>("--resolve-queue") { Description = "Resolves waiting before new ones are refused.", DefaultValueFactory = _ => 256 };
        var shardCache = new Option<int>("--shard-cache") { Description = "Tile shards kept in memory.", DefaultValueFactory = _ => 64 };
        var id = new Option<string?>("--id") { Description = "The worker's id (default: host, process id and a random suffix)." };
        var drain = DrainTimeout();
        var format = LogFormat();
        var admin = AdminListen();
        var command = new Command("worker", "Run a worker: computes tiles and answers resolves for the coordinator.");
        foreach (var option in new Option[] { listen, coordinator, advertise, threads, resolveQueue, shardCache, id, drain, format, admin })
        {
            command.Options.Add(option);
        }

        var limits = ServeLimits.ForWorker();
        limits.AddTo(command);
        var security = new ServerSecurityArguments(new ClientSecurityArguments("--token-file", "FIBER_TOKEN", "presented to the coordinator (a token with the worker role)"));
        security.AddTo(command);

        command.SetAction(async (parse, cancellation) =>
        {
            var address = Listen(parse.GetValue(listen)!);
            var defaults = new WorkerOptions { Coordinator = Url(parse.GetValue(coordinator)!, "--coordinator") };
            var options = defaults with
            {
                Advertise = parse.GetValue(advertise) is { } text ? Url(text, "--advertise") : null,
                Threads = Range(parse.GetValue(threads), 1, 4096, "--threads"),
                ResolveQueue = Range(parse.GetValue(resolveQueue), 1, 1_000_000, "--resolve-queue"),
                ShardCache = Range(parse.GetValue(shardCache), 1, 100_000, "--shard-cache"),
                Id = parse.GetValue(id) is { } name ? WorkerId(name) : defaults.Id,
                Fault = Environment.GetEnvironmentVariable("FIBER_WORKER_FAULT") is { Length: > 0 } fault ? fault : null,
                DrainTimeout = Seconds(parse.GetValue(drain), 0, 86_400, "--drain-timeout"),
                AdminListen = Admin(parse.GetValue(admin), address),
            };
            var (requestLimits, messageBytes) = limits.Read(parse);
            options = options with { Limits = requestLimits, MaxMessageBytes = messageBytes };
            if (address.IsAny && options.Advertise is null)
            {
                throw new UsageException($"--listen {address} binds every interface: give --advertise http://HOST:{address.Port} with the address others reach this worker at");
            }

            options = options with { Security = security.ResolveWorker(parse, address, options.Coordinator, options.Advertise) };
            CheckAdmin(options.AdminListen, options.Security);
            using var log = ServiceLogging.Create(parse.GetValue(format)!, "worker");
            if (options.Fault is not null)
            {
                log.Warning("FIBER_WORKER_FAULT={Fault}: this worker misbehaves on purpose (fault tests only)", options.Fault);
            }

            // Tiles run on their own threads; resolves and heartbeats use the pool, which must not wait to grow.
            ThreadPool.GetMinThreads(out var workers, out var io);
            ThreadPool.SetMinThreads(Math.Max(workers, 4 * options.Threads + 8), io);
            var server = await Start(() => WorkerServer.StartAsync(options, address, log, cancellation), address, error).ConfigureAwait(false);
            await using (server.ConfigureAwait(false))
            {
                await Until(server.Stopped, cancellation).ConfigureAwait(false);
            }

            return CommandLine.Success;
        });
        return command;
    }

    private static async Task<T> Start<T>(Func<Task<T>> start, ListenAddress address, TextWriter error)
    {
        try
        {
            return await start().ConfigureAwait(false);
        }
        catch (IOException e)
        {
            await error.WriteLineAsync($"fiber: cannot listen on {address}: {e.Message}").ConfigureAwait(false);
            throw new ListenException();
        }
    }

    private static async Task Until(Task stopped, CancellationToken cancellation)
    {
        try
        {
            await stopped.WaitAsync(cancellation).ConfigureAwait(false);
        }
        catch (OperationCanceledException)
        {
            // Ctrl+C or SIGTERM: stop gracefully.
        }
    }

    /// <summary>The admin listener is held to the gRPC listener's rule: off loopback only with TLS (the server's own certificate serves it).</summary>
    private static void CheckAdmin(ListenAddress? admin, FiberWorkers.Cluster.Security.ServerSecurity security)
    {
        if (admin is not null && security.Problem(admin) is { } problem)
        {
            throw new UsageException($"--admin-listen {problem}");
        }
    }

    /// <summary>The admin listener, which must not share the gRPC listener's port.</summary>
    private static ListenAddress? Admin(string? text, ListenAddress listen)
    {
        if (text is null)
        {
            return null;
        }

        ListenAddress admin;
        try
        {
            admin = ListenAddress.Parse(text, "--admin-listen");
        }
        catch (FormatException e)
        {
            throw new UsageException(e.Message);
        }

        return admin.Port != 0 && admin.Port == listen.Port
            ? throw new UsageException($"--admin-listen {admin} uses the port of --listen {listen}: give the admin listener a port of its own")
            : admin;
    }

    private static ListenAddress Listen(string text)
    {
        try
        {
            return ListenAddress.Parse(text, "--listen");
        }
        catch (FormatException e)
        {
            throw new UsageException(e.Message);
        }
    }

    internal static Uri Url(string text, string option) =>
        Uri.TryCreate(text, UriKind.Absolute, out var uri) && (uri.Scheme == Uri.UriSchemeHttp || uri.Scheme == Uri.UriSchemeHttps) && uri.Port > 0
            ? uri
            : throw new UsageException($"{option} '{text}' is not an address like http://127.0.0.1:7400");

    private static string WorkerId(string text) =>
        text.Length is >= 1 and <= 100 && text.All(c => char.IsAsciiLetterOrDigit(c) || c is '-' or '_' or '.')
            ? text
            : throw new UsageException($"--id '{text}': use 1 to 100 letters, digits, '-', '_' or '.'");

    private static TimeSpan Seconds(double value, double low, double high, string option) =>
        value >= low && value <= high
            ? TimeSpan.FromSeconds(value)
            : throw new UsageException(string.Create(CultureInfo.InvariantCulture, $"{option} must be between {low} and {high} seconds, got {value}"));

    private static int Range(int value, int low, int high, string option) =>
        value >= low && value <= high ? value : throw new UsageException($"{option} must be between {low} and {high}, got {value}");
}

/// <summary>A server could not bind its address (the message is already written); exit code 1.</summary>
internal sealed class ListenException() : Exception("cannot listen");
