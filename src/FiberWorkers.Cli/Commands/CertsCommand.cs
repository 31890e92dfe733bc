using System.CommandLine;
using System.Globalization;
using System.Text.Json;
using FiberWorkers.Cluster.Security;

namespace FiberWorkers.Cli.Commands;

/// <summary>
/// <c>fiber certs --out DIR [--hosts a,b,127.0.0.1] [--days N]</c>: a throwaway CA, a server and a client certificate
/// (ECDSA P-256, PEM) and a token file with two tokens, for trying a secured cluster out. Not for production: the CA
/// key is not kept, nothing is revocable.
/// </summary>
internal static class CertsCommand
{
    public static Command Create(TextWriter output)
    {
        var directory = new Option<string>("--out") { Description = "The directory to write into (created; existing files are never overwritten).", Required = true };
        var hosts = new Option<string>("--hosts") { Description = "Names and addresses the server certificate is valid for, comma-separated.", DefaultValueFactory = _ => "localhost,127.0.0.1,::1" };
        var days = new Option<int>("--days") { Description = "Days the certificates are valid.", DefaultValueFactory = _ => 30 };
        var command = new Command("certs", "For trying it out: a test CA, server and client certificates and tokens for a secured cluster.");
        command.Options.Add(directory);
        command.Options.Add(hosts);
        command.Options.Add(days);
        command.SetAction(parse =>
        {
            var names = Hosts(parse.GetValue(hosts)!);
            var validity = parse.GetValue(days) is >= 1 and <= 3650 ? parse.GetValue(days) : throw new UsageException($"--days must be between 1 and 3650, got {parse.GetValue(days)}");
            var target = parse.GetValue(directory)!;
            using var kit = CertificateKit.Create(names, validity);
            var client = CertificateKit.NewToken();
            var worker = CertificateKit.NewToken();
            var tokens = TokenFile([("client", client, [Roles.Submit, Roles.Query]), ("workers", worker, [Roles.Worker])]);
            var files = new List<(string Name, string Text, bool Secret)>
            {
                ("ca.pem", kit.Authority.ExportCertificatePem(), false),
                ("server.pem", kit.Server.ExportCertificatePem(), false),
                ("server.key", Key(kit.Server), true),
                ("client.pem", kit.Client.ExportCertificatePem(), false),
                ("client.key", Key(kit.Client), true),
                ("tokens.json", tokens, false),
                ("client.token", client, true),
                ("worker.token", worker, true),
            };
            IReadOnlyList<string> written;
            try
            {
                written = CertificateKit.WriteFiles(target, files);
            }
            catch (Exception e) when (e is IOException or UnauthorizedAccessException)
            {
                throw new UsageException($"--out {target}: {e.Message}");
            }

            output.WriteLine("FOR TRYING IT OUT ONLY: a throwaway CA (its key is not kept), certificates and tokens.");
            output.WriteLine(string.Create(CultureInfo.InvariantCulture, $"Server certificate for {string.Join(", ", names)}, valid {validity} days until {kit.Server.NotAfter.ToUniversalTime():yyyy-MM-dd}."));
            foreach (var file in written)
            {
                output.WriteLine($"  {file}");
            }

            output.WriteLine("tokens.json holds SHA-256 digests only: 'client' (submit, query) and 'workers' (worker); the tokens are in client.token and worker.token.");
            output.WriteLine($"Coordinator: fiber serve coordinator --tls-cert {Path.Combine(target, "server.pem")} --tls-key {Path.Combine(target, "server.key")} --tls-client-ca {Path.Combine(target, "ca.pem")} --tokens {Path.Combine(target, "tokens.json")} --tls-ca {Path.Combine(target, "ca.pem")} --tls-client-cert {Path.Combine(target, "server.pem")} --tls-client-key {Path.Combine(target, "server.key")} --worker-token-file {Path.Combine(target, "worker.token")} ...");
            output.WriteLine($"Client:      fiber sweep --coordinator https://{Url(names[0])}:7400 --tls-ca {Path.Combine(target, "ca.pem")} --tls-client-cert {Path.Combine(target, "client.pem")} --tls-client-key {Path.Combine(target, "client.key")} --token-file {Path.Combine(target, "client.token")} ...");
            return CommandLine.Success;
        });
        return command;
    }

    /// <summary>A token file with the tokens' digests only.</summary>
    internal static string TokenFile(IReadOnlyList<(string Name, string Token, string[] Roles)> tokens)
    {
        using var stream = new MemoryStream();
        using (var writer = new Utf8JsonWriter(stream, new JsonWriterOptions { Indented = true }))
        {
            writer.WriteStartObject();
            writer.WriteStartArray("tokens");
            foreach (var (name, token, roles) in tokens)
            {
                writer.WriteStartObject();
                writer.WriteString("name", name);
                writer.WriteString("sha256", TokenTable.Digest(token));
                writer.WriteStartArray("roles");
                foreach (var role in roles)
                {
                    writer.WriteStringValue(role);
                }

                writer.WriteEndArray();
                writer.WriteEndObject();
            }

            writer.WriteEndArray();
            writer.WriteEndObject();
        }

        return System.Text.Encoding.UTF8.GetString(stream.ToArray());
    }

    private static string[] Hosts(string text)
    {
        var names = text.Split(',', StringSplitOptions.RemoveEmptyEntries | StringSplitOptions.TrimEntries);
        if (names.Length == 0)
        {
            throw new UsageException("--hosts needs at least one name or address");
        }

        foreach (var name in names)
        {
            if (!System.Net.IPAddress.TryParse(name, out _) && Uri.CheckHostName(name) != UriHostNameType.Dns)
            {
                throw new UsageException($"--hosts: '{name}' is neither a DNS name nor an IP address");
            }
        }

        return names;
    }

    private static string Url(string host) => System.Net.IPAddress.TryParse(host, out var address) && address.AddressFamily == System.Net.Sockets.AddressFamily.InterNetworkV6 ? $"[{host}]" : host;

    private static string Key(System.Security.Cryptography.X509Certificates.X509Certificate2 certificate)
    {
        using var key = System.Security.Cryptography.X509Certificates.ECDsaCertificateExtensions.GetECDsaPrivateKey(certificate)
            ?? throw new InvalidOperationException("the certificate has no ECDSA key");
        return key.ExportPkcs8PrivateKeyPem();
    }
}
