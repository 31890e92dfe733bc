using Serilog;
using Serilog.Events;
using Serilog.Formatting.Compact;

namespace FiberWorkers.Cluster.Hosting;

/// <summary>
/// The servers' structured logs: compact JSON lines (one event per line, properties kept) when the output is not a
/// terminal or when asked, readable text on a terminal. Framework chatter is kept at warnings.
/// </summary>
public static class ServiceLogging
{
    /// <summary>Creates the logger; <paramref name="format"/> is auto, json or text.</summary>
    public static Serilog.Core.Logger Create(string format, string role)
    {
        var json = format switch
        {
            "json" => true,
            "text" => false,
            "auto" => Console.IsOutputRedirected,
            _ => throw new ArgumentException($"--log-format must be auto, json or text, got '{format}'"),
        };
        var configuration = new LoggerConfiguration()
            .MinimumLevel.Information()
            .MinimumLevel.Override("Microsoft", LogEventLevel.Warning)
            .MinimumLevel.Override("Grpc", LogEventLevel.Warning)
            .MinimumLevel.Override("System", LogEventLevel.Warning)
            .Enrich.WithProperty("Role", role);
        return (json
            ? configuration.WriteTo.Console(new CompactJsonFormatter())
            : configuration.WriteTo.Console(outputTemplate: "{Timestamp:HH:mm:ss.fff} {Level:u3} {Message:lj}{NewLine}{Exception}", formatProvider: System.Globalization.CultureInfo.InvariantCulture))
            .CreateLogger();
    }
}
