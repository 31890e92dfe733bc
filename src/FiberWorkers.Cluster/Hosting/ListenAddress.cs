using System.Globalization;
using System.Net;

namespace FiberWorkers.Cluster.Hosting;

/// <summary>A <c>HOST:PORT</c> to listen on: an IPv4 or bracketed IPv6 address, or <c>localhost</c> (loopback).</summary>
public sealed record ListenAddress(IPAddress Address, int Port)
{
    /// <summary>Parses "127.0.0.1:7400", "0.0.0.0:7401", "[::1]:0" or "localhost:7400"; throws <see cref="FormatException"/>.</summary>
    public static ListenAddress Parse(string text, string option)
    {
        ArgumentNullException.ThrowIfNull(text);
        var colon = text.LastIndexOf(':');
        if (colon <= 0 || colon == text.Length - 1)
        {
            throw new FormatException($"{option} '{text}' is not HOST:PORT (e.g. 127.0.0.1:7400)");
        }

        var host = text[..colon];
        if (host.StartsWith('[') && host.EndsWith(']'))
        {
            host = host[1..^1];
        }

        if (!int.TryParse(text[(colon + 1)..], NumberStyles.None, CultureInfo.InvariantCulture, out var port) || port > 65535)
        {
            throw new FormatException($"{option} '{text}': the port must be a number from 0 to 65535");
        }

        // Binding port 0 on "localhost" fails in Kestrel; loopback is what it means.
        var address = host.Equals("localhost", StringComparison.OrdinalIgnoreCase) ? IPAddress.Loopback
            : IPAddress.TryParse(host, out var parsed) ? parsed
            : throw new FormatException($"{option} '{text}': '{host}' is not an IP address (use 0.0.0.0 for every interface, or 127.0.0.1)");
        return new ListenAddress(address, port);
    }

    /// <summary>True for 127.0.0.0/8 and ::1.</summary>
    public bool IsLoopback => IPAddress.IsLoopback(Address);

    /// <summary>True for 0.0.0.0 and ::.</summary>
    public bool IsAny => Address.Equals(IPAddress.Any) || Address.Equals(IPAddress.IPv6Any);

    public override string ToString() =>
        Address.AddressFamily == System.Net.Sockets.AddressFamily.InterNetworkV6 ? $"[{Address}]:{Port}" : $"{Address}:{Port}";
}
