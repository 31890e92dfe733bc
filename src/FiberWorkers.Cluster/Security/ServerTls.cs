using System.Security.Authentication;
using System.Security.Cryptography.X509Certificates;
using Microsoft.AspNetCore.Hosting;
using Microsoft.AspNetCore.Server.Kestrel.Core;
using Microsoft.AspNetCore.Server.Kestrel.Https;

namespace FiberWorkers.Cluster.Security;

/// <summary>
/// TLS of a listener: the server's certificate and key, and optionally the CA whose client certificates are required
/// (mutual TLS: a client without a certificate chaining to that CA, for client authentication, cannot connect).
/// </summary>
public sealed class ServerTls
{
    private ServerTls(X509Certificate2 certificate, X509Certificate2Collection chain, X509Certificate2Collection? clientAuthorities)
    {
        Certificate = certificate;
        Chain = chain;
        ClientAuthorities = clientAuthorities;
    }

    /// <summary>The server's certificate (with its private key).</summary>
    public X509Certificate2 Certificate { get; }

    /// <summary>Intermediate certificates sent with it.</summary>
    public X509Certificate2Collection Chain { get; }

    /// <summary>The roots client certificates must chain to; null: no client certificate asked for.</summary>
    public X509Certificate2Collection? ClientAuthorities { get; }

    /// <summary>True when clients must present a certificate.</summary>
    public bool MutualTls => ClientAuthorities is not null;

    /// <summary>Reads the PEM files (an <see cref="FiberWorkers.Algebra.Families.InputException"/> names a file that is missing or wrong).</summary>
    public static ServerTls Load(string certificateFile, string keyFile, string? clientCaFile = null)
    {
        var (certificate, chain) = CertificateFiles.LoadWithKey(certificateFile, keyFile);
        return new ServerTls(certificate, chain, clientCaFile is null ? null : CertificateFiles.LoadBundle(clientCaFile));
    }

    /// <summary>A listener's TLS from certificates in memory (tests, <c>fiber certs</c>).</summary>
    public static ServerTls FromCertificates(X509Certificate2 certificate, X509Certificate2Collection? clientAuthorities = null)
    {
        ArgumentNullException.ThrowIfNull(certificate);
        return certificate.HasPrivateKey
            ? new ServerTls(certificate, [], clientAuthorities)
            : throw new ArgumentException("the server certificate needs its private key", nameof(certificate));
    }

    /// <summary>Switches a Kestrel endpoint to TLS 1.2/1.3 with this certificate (and client certificates when required).</summary>
    /// <param name="endpoint">The endpoint.</param>
    /// <param name="clientCertificates">
    /// Require client certificates when <see cref="MutualTls"/>; false for the admin listener, whose callers (probes,
    /// metrics scrapers) carry none and which serves no atlas data.
    /// </param>
    internal void Configure(ListenOptions endpoint, bool clientCertificates = true)
    {
        endpoint.UseHttps(https =>
        {
            https.ServerCertificate = Certificate;
            if (Chain.Count > 0)
            {
                https.ServerCertificateChain = Chain;
            }

            https.SslProtocols = SslProtocols.Tls12 | SslProtocols.Tls13;
            if (ClientAuthorities is { } roots && clientCertificates)
            {
                https.ClientCertificateMode = ClientCertificateMode.RequireCertificate;
                https.ClientCertificateValidation = (certificate, chain, _) =>
                {
                    var intermediates = new X509Certificate2Collection();
                    if (chain is not null)
                    {
                        foreach (var element in chain.ChainElements)
                        {
                            intermediates.Add(element.Certificate);
                        }
                    }

                    return CertificateFiles.Chains(certificate, roots, CertificateFiles.ClientAuthentication, intermediates);
                };
            }
        });
    }

    /// <summary>Describes the TLS set-up for logs (subject and expiry, never key material).</summary>
    public override string ToString() =>
        $"TLS with {Certificate.Subject} (until {Certificate.NotAfter.ToUniversalTime():yyyy-MM-dd})" + (MutualTls ? "; client certificates required" : string.Empty);
}
