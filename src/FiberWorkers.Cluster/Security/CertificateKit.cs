using System.Net;
using System.Security.Cryptography;
using System.Security.Cryptography.X509Certificates;
using System.Text;

namespace FiberWorkers.Cluster.Security;

/// <summary>
/// A throwaway certificate authority with one server and one client certificate (ECDSA P-256), for trying TLS and
/// mutual TLS out and for tests — not a way to run a public service. The server certificate names the given hosts
/// (DNS names or IP addresses) and serves for client authentication too, so a coordinator can present it to workers.
/// </summary>
public sealed class CertificateKit : IDisposable
{
    private CertificateKit(X509Certificate2 authority, X509Certificate2 server, X509Certificate2 client)
    {
        Authority = authority;
        Server = server;
        Client = client;
    }

    /// <summary>The CA certificate (with its key, which <see cref="WriteTo"/> does not write).</summary>
    public X509Certificate2 Authority { get; }

    public X509Certificate2 Server { get; }

    public X509Certificate2 Client { get; }

    /// <summary>Makes the CA and both certificates, valid from five minutes ago for <paramref name="days"/> days.</summary>
    public static CertificateKit Create(IReadOnlyList<string> hosts, int days, string name = "fiberworkers test")
    {
        ArgumentNullException.ThrowIfNull(hosts);
        ArgumentOutOfRangeException.ThrowIfLessThan(days, 1);
        if (hosts.Count == 0)
        {
            throw new ArgumentException("the server certificate needs at least one host", nameof(hosts));
        }

        var from = DateTimeOffset.UtcNow.AddMinutes(-5);
        var until = from.AddDays(days);
        var authority = CreateAuthority($"CN={name} CA", from, until);
        var server = Issue(authority, $"CN={name} server", hosts, [CertificateFiles.ServerAuthentication, CertificateFiles.ClientAuthentication], from, until);
        var client = Issue(authority, $"CN={name} client", [], [CertificateFiles.ClientAuthentication], from, until);
        return new CertificateKit(authority, server, client);
    }

    /// <summary>A self-signed CA certificate that signs leaf certificates only.</summary>
    public static X509Certificate2 CreateAuthority(string subject, DateTimeOffset from, DateTimeOffset until)
    {
        using var key = ECDsa.Create(ECCurve.NamedCurves.nistP256);
        var request = new CertificateRequest(subject, key, HashAlgorithmName.SHA256);
        request.CertificateExtensions.Add(new X509BasicConstraintsExtension(true, true, 0, true));
        request.CertificateExtensions.Add(new X509KeyUsageExtension(X509KeyUsageFlags.KeyCertSign | X509KeyUsageFlags.CrlSign, true));
        request.CertificateExtensions.Add(new X509SubjectKeyIdentifierExtension(request.PublicKey, false));
        return request.CreateSelfSigned(from, until);
    }

    /// <summary>A leaf certificate signed by <paramref name="authority"/>, with its own key, naming <paramref name="hosts"/>.</summary>
    public static X509Certificate2 Issue(X509Certificate2 authority, string subject, IReadOnlyList<string> hosts, IReadOnlyList<Oid> purposes, DateTimeOffset from, DateTimeOffset until)
    {
        ArgumentNullException.ThrowIfNull(authority);
        ArgumentNullException.ThrowIfNull(hosts);
        ArgumentNullException.ThrowIfNull(purposes);
        using var key = ECDsa.Create(ECCurve.NamedCurves.nistP256);
        var request = new CertificateRequest(subject, key, HashAlgorithmName.SHA256);
        request.CertificateExtensions.Add(new X509BasicConstraintsExtension(false, false, 0, true));
        request.CertificateExtensions.Add(new X509KeyUsageExtension(X509KeyUsageFlags.DigitalSignature, true));
        var usages = new OidCollection();
        foreach (var purpose in purposes)
        {
            usages.Add(purpose);
        }

        request.CertificateExtensions.Add(new X509EnhancedKeyUsageExtension(usages, false));
        request.CertificateExtensions.Add(new X509SubjectKeyIdentifierExtension(request.PublicKey, false));
        request.CertificateExtensions.Add(X509AuthorityKeyIdentifierExtension.CreateFromCertificate(authority, true, false));
        if (hosts.Count > 0)
        {
            var names = new SubjectAlternativeNameBuilder();
            foreach (var host in hosts)
            {
                if (IPAddress.TryParse(host, out var address))
                {
                    names.AddIpAddress(address);
                }
                else
                {
                    names.AddDnsName(host);
                }
            }

            request.CertificateExtensions.Add(names.Build(true));
        }

        var serial = RandomNumberGenerator.GetBytes(16);
        serial[0] &= 0x7F;
        using var signed = request.Create(authority, from, until > authority.NotAfter ? authority.NotAfter : until, serial);
        return signed.CopyWithPrivateKey(key);
    }

    /// <summary>
    /// Writes <c>ca.pem</c>, <c>server.pem</c>, <c>server.key</c>, <c>client.pem</c> and <c>client.key</c> (keys
    /// PKCS#8 PEM, mode 0600) into <paramref name="directory"/>; refuses to overwrite any of them.
    /// </summary>
    public IReadOnlyList<string> WriteTo(string directory)
    {
        ArgumentNullException.ThrowIfNull(directory);
        var files = new (string Name, string Text, bool Secret)[]
        {
            ("ca.pem", Authority.ExportCertificatePem(), false),
            ("server.pem", Server.ExportCertificatePem(), false),
            ("server.key", KeyPem(Server), true),
            ("client.pem", Client.ExportCertificatePem(), false),
            ("client.key", KeyPem(Client), true),
        };
        return WriteFiles(directory, files);
    }

    /// <summary>Writes files that must not exist yet; secrets get mode 0600.</summary>
    public static IReadOnlyList<string> WriteFiles(string directory, IReadOnlyList<(string Name, string Text, bool Secret)> files)
    {
        ArgumentNullException.ThrowIfNull(directory);
        ArgumentNullException.ThrowIfNull(files);
        Directory.CreateDirectory(directory);
        var existing = files.Select(f => Path.Combine(directory, f.Name)).Where(File.Exists).ToList();
        if (existing.Count > 0)
        {
            throw new IOException($"{string.Join(", ", existing)} already exist{(existing.Count == 1 ? "s" : string.Empty)}: give a new or empty directory");
        }

        var written = new List<string>();
        foreach (var (name, text, secret) in files)
        {
            var path = Path.Combine(directory, name);
            var options = new FileStreamOptions { Mode = FileMode.CreateNew, Access = FileAccess.Write };
            if (!OperatingSystem.IsWindows())
            {
                options.UnixCreateMode = secret ? UnixFileMode.UserRead | UnixFileMode.UserWrite : UnixFileMode.UserRead | UnixFileMode.UserWrite | UnixFileMode.GroupRead | UnixFileMode.OtherRead;
            }

            using (var stream = new FileStream(path, options))
            {
                stream.Write(Encoding.ASCII.GetBytes(text.EndsWith('\n') ? text : text + "\n"));
            }

            written.Add(path);
        }

        return written;
    }

    /// <summary>A new random token (32 bytes, base64url: 43 characters).</summary>
    public static string NewToken() => Convert.ToBase64String(RandomNumberGenerator.GetBytes(32)).TrimEnd('=').Replace('+', '-').Replace('/', '_');

    public void Dispose()
    {
        Authority.Dispose();
        Server.Dispose();
        Client.Dispose();
    }

    private static string KeyPem(X509Certificate2 certificate)
    {
        using var key = certificate.GetECDsaPrivateKey() ?? throw new InvalidOperationException("the certificate has no ECDSA key");
        return key.ExportPkcs8PrivateKeyPem();
    }
}
