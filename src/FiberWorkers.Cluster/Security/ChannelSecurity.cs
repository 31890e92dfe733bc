using System.Net;
using System.Net.Security;
using System.Security.Cryptography.X509Certificates;
using Grpc.Core;
using Grpc.Net.Client;

namespace FiberWorkers.Cluster.Security;

/// <summary>
/// Opens every gRPC channel of the cluster (clients to the coordinator and to workers, workers to the coordinator,
/// the coordinator to workers): https with the client's roots and certificate when the address is https, and the
/// bearer token on every call. A token is never sent in clear to a host other than loopback.
/// </summary>
public static class ChannelSecurity
{
    /// <summary>Why <paramref name="address"/> cannot be reached with <paramref name="security"/>, or null when it can.</summary>
    public static string? Problem(Uri address, ClientSecurity security)
    {
        ArgumentNullException.ThrowIfNull(address);
        ArgumentNullException.ThrowIfNull(security);
        if (address.Scheme != Uri.UriSchemeHttp && address.Scheme != Uri.UriSchemeHttps)
        {
            return $"'{address}' is neither http:// nor https://";
        }

        return address.Scheme == Uri.UriSchemeHttp && security.HasToken && !IsLoopback(address)
            ? $"'{address.GetLeftPart(UriPartial.Authority)}' is plain http to a host other than loopback: the bearer token would travel unencrypted (use https)"
            : null;
    }

    /// <summary>Opens a channel; throws <see cref="ArgumentException"/> when <see cref="Problem"/> has an objection.</summary>
    public static GrpcChannel Open(Uri address, ClientSecurity security, int maxMessageBytes)
    {
        if (Problem(address, security) is { } problem)
        {
            throw new ArgumentException(problem, nameof(address));
        }

        var options = new GrpcChannelOptions { MaxReceiveMessageSize = maxMessageBytes, MaxSendMessageSize = maxMessageBytes };
        var https = address.Scheme == Uri.UriSchemeHttps;
        if (https && (security.TrustedRoots is not null || security.ClientCertificate is not null || security.ServerName is not null))
        {
            var ssl = new SslClientAuthenticationOptions();
            if (security.TrustedRoots is not null || security.ServerName is not null)
            {
                ssl.RemoteCertificateValidationCallback = (_, certificate, chain, errors) => Trusted(security, certificate, chain, errors);
            }

            if (security.ClientCertificate is { } mine)
            {
                ssl.ClientCertificates = [mine];
            }

            // As Grpc.Net.Client's own handler: more than one HTTP/2 connection when streams run out.
            options.HttpHandler = new SocketsHttpHandler { EnableMultipleHttp2Connections = true, SslOptions = ssl };
            options.DisposeHttpClient = true;
        }

        if (security.Token is { } token)
        {
            var header = $"Bearer {token}";
            var credentials = CallCredentials.FromInterceptor((_, metadata) =>
            {
                metadata.Add("authorization", header);
                return Task.CompletedTask;
            });
            options.Credentials = ChannelCredentials.Create(https ? ChannelCredentials.SecureSsl : ChannelCredentials.Insecure, credentials);

            // Plain http only reaches loopback here (Problem refuses the rest).
            options.UnsafeUseInsecureChannelCallCredentials = !https;
        }

        return GrpcChannel.ForAddress(address, options);
    }

    /// <summary>
    /// A server certificate chains to the client's roots (or the system's, when it has none) and names the client's
    /// <see cref="ClientSecurity.ServerName"/> (or the URL's host, as the TLS stack checked).
    /// </summary>
    private static bool Trusted(ClientSecurity security, X509Certificate? certificate, X509Chain? chain, SslPolicyErrors errors)
    {
        if (certificate is not X509Certificate2 presented)
        {
            return false;
        }

        var ignored = security.ServerName is null ? SslPolicyErrors.None : SslPolicyErrors.RemoteCertificateNameMismatch;
        if (security.TrustedRoots is { } roots)
        {
            ignored |= SslPolicyErrors.RemoteCertificateChainErrors;
        }

        return (errors & ~ignored) == SslPolicyErrors.None
            && (security.TrustedRoots is not { } trusted || CertificateFiles.Chains(presented, trusted, CertificateFiles.ServerAuthentication, Intermediates(chain)))
            && (security.ServerName is not { } name || presented.MatchesHostname(name));
    }

    /// <summary>True for localhost, 127.0.0.0/8 and ::1.</summary>
    public static bool IsLoopback(Uri address)
    {
        ArgumentNullException.ThrowIfNull(address);
        return address.IsLoopback || (IPAddress.TryParse(address.DnsSafeHost, out var ip) && IPAddress.IsLoopback(ip));
    }

    private static X509Certificate2Collection Intermediates(X509Chain? chain)
    {
        var intermediates = new X509Certificate2Collection();
        if (chain is not null)
        {
            foreach (var element in chain.ChainElements)
            {
                intermediates.Add(element.Certificate);
            }
        }

        return intermediates;
    }
}
