using Microsoft.AspNetCore.Builder;
using Microsoft.AspNetCore.Hosting;
using Microsoft.AspNetCore.Hosting.Server;
using Microsoft.AspNetCore.Hosting.Server.Features;
using Microsoft.AspNetCore.Server.Kestrel.Core;
using Microsoft.Extensions.DependencyInjection;
using Microsoft.Extensions.Diagnostics.HealthChecks;
using Microsoft.Extensions.Hosting;
using FiberWorkers.Cluster.Security;
using Serilog;

namespace FiberWorkers.Cluster.Hosting;

/// <summary>How a gRPC server listens.</summary>
public sealed record HostSettings
{
    public required ListenAddress Listen { get; init; }

    /// <summary>Largest request or reply message, in bytes (shards of dense atlases run to tens of megabytes).</summary>
    public int MaxMessageBytes { get; init; } = 64 << 20;

    /// <summary>Where the server's events go.</summary>
    public required ILogger Logger { get; init; }

    /// <summary>How long calls in flight may run on after a stop signal (SIGTERM) before the host stops anyway.</summary>
    public TimeSpan DrainTimeout { get; init; } = TimeSpan.FromSeconds(20);

    /// <summary>Called when the host begins to stop (SIGTERM, Ctrl+C or a call to stop it).</summary>
    public Action? Stopping { get; init; }

    /// <summary>Reported by the "ready" health service (grpc.health.v1, service name "ready"); null: always ready.</summary>
    public Func<bool>? Ready { get; init; }

    /// <summary>TLS of the gRPC listener and the tokens its calls need (default: plaintext without tokens, loopback only).</summary>
    public ServerSecurity Security { get; init; } = ServerSecurity.None;

    /// <summary>
    /// Where the admin listener binds (HTTP/1.1: <c>/metrics</c> in Prometheus text format, <c>/healthz</c>,
    /// <c>/readyz</c>; no gRPC), with the TLS of <see cref="Security"/> and under the same rule (off loopback only with
    /// TLS); null (the default): no admin listener.
    /// </summary>
    public ListenAddress? AdminListen { get; init; }
}

/// <summary>
/// A Kestrel server with gRPC over HTTP/2, the gRPC health service (grpc.health.v1: service "" is liveness,
/// "ready" is readiness) and server reflection. Used by both the coordinator and the worker.
/// </summary>
public sealed class GrpcHost : IAsyncDisposable
{
    private readonly WebApplication _app;

    private GrpcHost(WebApplication app, Uri address, Uri? adminAddress)
    {
        _app = app;
        Address = address;
        AdminAddress = adminAddress;
    }

    /// <summary>The bound address, e.g. http://127.0.0.1:41234 (port 0 resolved).</summary>
    public Uri Address { get; }

    /// <summary>The admin listener's bound address (http://HOST:PORT, https:// with TLS), or null without one.</summary>
    public Uri? AdminAddress { get; }

    /// <summary>The host's services (the service objects registered by the caller).</summary>
    public IServiceProvider Services => _app.Services;

    /// <summary>Completes when the host stops.</summary>
    public Task Stopped => _app.WaitForShutdownAsync();

    /// <summary>Builds and starts the server; <paramref name="map"/> maps the gRPC services.</summary>
    public static async Task<GrpcHost> StartAsync(HostSettings settings, Action<IServiceCollection> services, Action<WebApplication> map, CancellationToken cancellation = default)
    {
        ArgumentNullException.ThrowIfNull(settings);
        ArgumentNullException.ThrowIfNull(services);
        ArgumentNullException.ThrowIfNull(map);
        if (settings.Security.Problem(settings.Listen) is { } insecure)
        {
            throw new InvalidOperationException(insecure);
        }

        var builder = WebApplication.CreateSlimBuilder(new WebApplicationOptions { Args = [], ApplicationName = "fiber" });
        builder.Services.AddSerilog(settings.Logger, dispose: false);
        ListenOptions? admin = null;
        builder.WebHost.ConfigureKestrel(kestrel =>
        {
            kestrel.AddServerHeader = false;
            // A message and its 5-byte gRPC frame header; MessageSizeLimit refuses larger messages by name first.
            kestrel.Limits.MaxRequestBodySize = settings.MaxMessageBytes + 5L;
            kestrel.Listen(settings.Listen.Address, settings.Listen.Port, endpoint =>
            {
                endpoint.Protocols = HttpProtocols.Http2;
                settings.Security.Tls?.Configure(endpoint);
            });
        });
        if (settings.AdminListen is { } adminListen)
        {
            // Held to the gRPC listener's rule and served with its TLS: off loopback only over TLS.
            if (settings.Security.Problem(adminListen) is { } adminInsecure)
            {
                throw new InvalidOperationException($"admin listener: {adminInsecure}");
            }

            builder.WebHost.ConfigureKestrel(kestrel => kestrel.Listen(adminListen.Address, adminListen.Port, endpoint =>
            {
                endpoint.Protocols = HttpProtocols.Http1;
                settings.Security.Tls?.Configure(endpoint, clientCertificates: false);
                admin = endpoint;
            }));
            AdminEndpoint.AddServices(builder.Services);
        }

        builder.Services.Configure<HostOptions>(o => o.ShutdownTimeout = settings.DrainTimeout);
        builder.Services.AddGrpc(o =>
        {
            o.MaxReceiveMessageSize = settings.MaxMessageBytes;
            o.MaxSendMessageSize = settings.MaxMessageBytes;
            o.EnableDetailedErrors = false;
            if (settings.Security.Tokens is { } tokens)
            {
                o.Interceptors.Add<AuthInterceptor>(tokens, settings.Logger);
            }
        });
        builder.Services.AddGrpcReflection();
        var ready = settings.Ready ?? (() => true);
        builder.Services.AddGrpcHealthChecks(o =>
        {
            o.UseHealthChecksCache = false;
            o.Services.Map(string.Empty, r => r.Tags.Contains("live"));
            o.Services.Map("ready", r => r.Tags.Contains("ready"));
        })
            .AddCheck("process", () => HealthCheckResult.Healthy(), ["live"])
            .AddCheck("ready", () => ready() ? HealthCheckResult.Healthy() : HealthCheckResult.Unhealthy("not ready"), ["ready"]);
        services(builder.Services);
        var app = builder.Build();
        app.Use(MessageSizeLimit.Create(settings.MaxMessageBytes));
        map(app);
        if (settings.AdminListen is not null)
        {
            AdminEndpoint.Map(app, () => admin?.IPEndPoint?.Port ?? -1, ready);
        }

        if (settings.Stopping is { } stopping)
        {
            app.Lifetime.ApplicationStopping.Register(stopping);
        }

        app.MapGrpcHealthChecksService();
        app.MapGrpcReflectionService();
        await app.StartAsync(cancellation).ConfigureAwait(false);
        if (settings.Security.InsecureNoAuth && settings.Security.Tokens is null)
        {
            settings.Logger.Warning("calls need no token (--insecure-no-auth): anyone who can connect may submit sweeps, read atlases and register workers");
        }

        settings.Logger.Information("security: {Security}", settings.Security.Describe());
        var bound = app.Services.GetRequiredService<IServer>().Features.Get<IServerAddressesFeature>()!.Addresses.First();
        var adminAddress = admin?.IPEndPoint is { } adminBound ? new Uri($"{(settings.Security.Tls is null ? "http" : "https")}://{new ListenAddress(adminBound.Address, adminBound.Port)}") : null;
        return new GrpcHost(app, new Uri(bound.Replace("[::]", "[::1]", StringComparison.Ordinal).Replace("0.0.0.0", "127.0.0.1", StringComparison.Ordinal)), adminAddress);
    }

    /// <summary>Stops accepting calls and lets running ones finish (up to the shutdown timeout).</summary>
    public Task StopAsync(CancellationToken cancellation = default) => _app.StopAsync(cancellation);

    public async ValueTask DisposeAsync()
    {
        await _app.StopAsync().ConfigureAwait(false);
        await _app.DisposeAsync().ConfigureAwait(false);
    }
}
