using Microsoft.AspNetCore.Builder;
using Microsoft.AspNetCore.Http;
using Microsoft.Extensions.DependencyInjection;
using OpenTelemetry.Metrics;

namespace FiberWorkers.Cluster.Hosting;

/// <summary>
/// The admin listener of a server (<c>--admin-listen</c>): plain HTTP/1.1 on its own port serving only
/// <c>/metrics</c> (the <see cref="ClusterMetrics"/> meter in Prometheus text format), <c>/healthz</c> (200 while the
/// process runs) and <c>/readyz</c> (200 when ready, 503 otherwise). Anything else on that port is 404, and none of
/// these paths is served on the gRPC port.
/// </summary>
internal static class AdminEndpoint
{
    /// <summary>Registers the metrics provider with the Prometheus exporter.</summary>
    public static void AddServices(IServiceCollection services) =>
        services.AddOpenTelemetry().WithMetrics(metrics => metrics.AddMeter(ClusterMetrics.MeterName).AddPrometheusExporter());

    /// <summary>
    /// Adds the admin routes ahead of the gRPC endpoints. <paramref name="adminPort"/> gives the admin listener's bound
    /// port (known once the server started; until then no connection counts as an admin one).
    /// </summary>
    public static void Map(WebApplication app, Func<int> adminPort, Func<bool> ready)
    {
        bool IsAdmin(HttpContext context) => context.Connection.LocalPort == adminPort();
        app.UseOpenTelemetryPrometheusScrapingEndpoint(context => IsAdmin(context) && context.Request.Path == "/metrics");
        app.Use(async (context, next) =>
        {
            if (!IsAdmin(context))
            {
                await next(context).ConfigureAwait(false);
                return;
            }

            var path = context.Request.Path;
            if (path == "/healthz")
            {
                await context.Response.WriteAsync("ok\n").ConfigureAwait(false);
            }
            else if (path == "/readyz")
            {
                var isReady = ready();
                context.Response.StatusCode = isReady ? StatusCodes.Status200OK : StatusCodes.Status503ServiceUnavailable;
                await context.Response.WriteAsync(isReady ? "ready\n" : "not ready\n").ConfigureAwait(false);
            }
            else
            {
                // The admin port serves no gRPC service, whatever the path.
                context.Response.StatusCode = StatusCodes.Status404NotFound;
            }
        });
    }
}
