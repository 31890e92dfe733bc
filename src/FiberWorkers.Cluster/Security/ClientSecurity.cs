using System.Security.Cryptography.X509Certificates;
using FiberWorkers.Algebra.Families;

namespace FiberWorkers.Cluster.Security;

/// <summary>
/// How a client (a CLI command, a worker calling its coordinator, the coordinator calling workers) connects: the roots
/// it trusts for https servers (null: the system store), the certificate it presents under mutual TLS, and the bearer
/// token it sends. The token is never part of <see cref="ToString"/>.
/// </summary>
public sealed class ClientSecurity
{
    private readonly string? _token;

    /// <summary>Creates client settings; <paramref name="token"/> must pass <see cref="TokenTable.TokenProblem"/>.</summary>
    /// <param name="trustedRoots">The roots https servers must chain to; null: the system's.</param>
    /// <param name="clientCertificate">Presented under mutual TLS; null: none.</param>
    /// <param name="token">The bearer token; null: none.</param>
    /// <param name="serverName">The name server certificates must carry instead of the host of the URL (workers called by IP); null: the URL's host.</param>
    public ClientSecurity(X509Certificate2Collection? trustedRoots = null, X509Certificate2? clientCertificate = null, string? token = null, string? serverName = null)
    {
        if (token is not null && TokenTable.TokenProblem(token) is { } problem)
        {
            throw new ArgumentException($"the token {problem}", nameof(token));
        }

        if (clientCertificate is { HasPrivateKey: false })
        {
            throw new ArgumentException("the client certificate needs its private key", nameof(clientCertificate));
        }

        if (serverName is not null && Uri.CheckHostName(serverName) is not (UriHostNameType.Dns or UriHostNameType.IPv4 or UriHostNameType.IPv6))
        {
            throw new ArgumentException($"'{serverName}' is not a host name", nameof(serverName));
        }

        TrustedRoots = trustedRoots;
        ClientCertificate = clientCertificate;
        ServerName = serverName;
        _token = token;
    }

    /// <summary>Plain defaults: system roots, no certificate, no token.</summary>
    public static ClientSecurity None { get; } = new();

    /// <summary>The CA certificates https servers must chain to; null: the system's trusted roots.</summary>
    public X509Certificate2Collection? TrustedRoots { get; }

    /// <summary>Presented to servers that require client certificates; null: none.</summary>
    public X509Certificate2? ClientCertificate { get; }

    /// <summary>The name every server certificate must carry (instead of the URL's host); null: the URL's host.</summary>
    public string? ServerName { get; }

    /// <summary>True when calls carry a bearer token.</summary>
    public bool HasToken => _token is not null;

    /// <summary>The bearer token, for the channel's call credentials only.</summary>
    internal string? Token => _token;

    /// <summary>
    /// Reads the files a command line names: a CA bundle, a client certificate and key (both or neither) and a token
    /// file (its first line, surrounding white space removed). Errors name the file.
    /// </summary>
    public static ClientSecurity Load(string? caFile, string? certificateFile, string? keyFile, string? tokenFile, string? serverName = null)
    {
        var roots = caFile is null ? null : CertificateFiles.LoadBundle(caFile);
        X509Certificate2? certificate = null;
        if (certificateFile is not null && keyFile is not null)
        {
            certificate = CertificateFiles.LoadWithKey(certificateFile, keyFile).Certificate;
        }
        else if (certificateFile is not null || keyFile is not null)
        {
            throw new ArgumentException("a client certificate needs both its certificate file and its key file");
        }

        return new ClientSecurity(roots, certificate, tokenFile is null ? null : ReadToken(tokenFile), serverName);
    }

    /// <summary>The token held by a token file: its text without surrounding white space (a trailing newline is usual).</summary>
    public static string ReadToken(string file)
    {
        ArgumentNullException.ThrowIfNull(file);
        string text;
        try
        {
            text = File.ReadAllText(file).Trim();
        }
        catch (Exception e) when (e is IOException or UnauthorizedAccessException)
        {
            throw new InputException(file, string.Empty, e is FileNotFoundException or DirectoryNotFoundException ? "no such file" : $"cannot read the token file: {e.Message}");
        }

        return TokenTable.TokenProblem(text) is { } problem ? throw new InputException(file, string.Empty, $"the token {problem}") : text;
    }

    /// <summary>The same settings with another token.</summary>
    public ClientSecurity WithToken(string? token) => new(TrustedRoots, ClientCertificate, token, ServerName);

    /// <summary>What is set, for logs: never the token.</summary>
    public override string ToString() =>
        $"roots: {(TrustedRoots is null ? "system" : $"{TrustedRoots.Count} from file")}, client certificate: {ClientCertificate?.Subject ?? "none"}, server name: {ServerName ?? "from the URL"}, token: {(HasToken ? "given" : "none")}";
}
