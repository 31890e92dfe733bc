using FiberWorkers.Cluster.Security;

namespace FiberWorkers.Cli.Tests.Commands;

/// <summary>
/// The security options of <c>fiber serve</c> and of the client commands, and <c>fiber certs</c>: every refused
/// combination is a usage error (exit 2) naming the option, a missing or wrong file an input error (exit 1) naming
/// the file — all before anything listens.
/// </summary>
public sealed class ServeSecurityTests : IDisposable
{
    private readonly string _directory = Directory.CreateTempSubdirectory("fiber-serve-security-").FullName;

    public void Dispose() => Directory.Delete(_directory, recursive: true);

    public static TheoryData<string[], string> Refused => new()
    {
        { ["serve", "coordinator", "--listen", "0.0.0.0:7400", "--store", "sqlite:unused.db"], "--listen 0.0.0.0:7400 is not a loopback address: give --tls-cert and --tls-key (TLS is required outside loopback)" },
        { ["serve", "coordinator", "--listen", "127.0.0.1:7400", "--store", "sqlite:unused.db"], "--listen 127.0.0.1:7400: give --tls-cert and --tls-key, or --plaintext to serve without TLS on loopback" },
        { ["serve", "coordinator", "--listen", "10.0.0.5:7400", "--plaintext", "--store", "sqlite:unused.db"], "--plaintext is allowed only with a loopback --listen (127.0.0.1, ::1), not 10.0.0.5:7400" },
        { ["serve", "coordinator", "--store", "sqlite:unused.db", "--tls-cert", "server.pem"], "--tls-cert needs --tls-key" },
        { ["serve", "coordinator", "--store", "sqlite:unused.db", "--plaintext", "--tls-cert", "s.pem", "--tls-key", "s.key"], "give either --plaintext or --tls-cert and --tls-key, not both" },
        { ["serve", "coordinator", "--store", "sqlite:unused.db", "--plaintext", "--tls-client-ca", "ca.pem"], "--tls-client-ca (mutual TLS) needs --tls-cert and --tls-key" },
        { ["serve", "worker", "--listen", "0.0.0.0:7401", "--advertise", "http://w1:7401", "--coordinator", "http://127.0.0.1:7400", "--plaintext"], "--plaintext is allowed only with a loopback --listen" },
        { ["serve", "worker", "--coordinator", "http://127.0.0.1:7400", "--plaintext", "--tls-client-cert", "c.pem"], "--tls-client-cert needs --tls-client-key" },
    };

    [Theory]
    [MemberData(nameof(Refused))]
    public async Task A_refused_combination_is_a_usage_error_naming_the_option(string[] args, string message)
    {
        var (code, _, error) = await CliRunner.RunAsync(args).WaitAsync(TimeSpan.FromSeconds(60));

        Assert.Equal(2, code);
        Assert.Contains(message, error, StringComparison.Ordinal);
    }

    [Fact]
    public async Task A_missing_certificate_file_is_named()
    {
        var missing = Path.Combine(_directory, "nowhere", "server.pem");
        var (code, _, error) = await CliRunner.RunAsync(
            "serve", "coordinator", "--listen", "0.0.0.0:7400", "--store", "sqlite:unused.db", "--tls-cert", missing, "--tls-key", Path.Combine(_directory, "server.key"), "--insecure-no-auth")
            .WaitAsync(TimeSpan.FromSeconds(60));

        Assert.Equal(1, code);
        Assert.Contains($"{missing}: no such file", error, StringComparison.Ordinal);
    }

    [Fact]
    public async Task Outside_loopback_a_server_with_tls_still_needs_tokens_or_the_loud_opt_out()
    {
        var kit = await Certs();
        var (code, _, error) = await CliRunner.RunAsync(
            "serve", "worker", "--listen", "0.0.0.0:7401", "--advertise", "https://w1.example:7401", "--coordinator", "https://c.example:7400",
            "--tls-cert", kit.File("server.pem"), "--tls-key", kit.File("server.key")).WaitAsync(TimeSpan.FromSeconds(60));

        Assert.Equal(2, code);
        Assert.Contains("--listen 0.0.0.0:7401 is not a loopback address: give --tokens FILE (or $FIBER_TOKENS_FILE / $FIBER_TOKENS), or --insecure-no-auth", error, StringComparison.Ordinal);
    }

    [Fact]
    public async Task A_worker_listening_with_tls_must_advertise_https()
    {
        var kit = await Certs();
        var (code, _, error) = await CliRunner.RunAsync(
            "serve", "worker", "--listen", "0.0.0.0:7401", "--advertise", "http://w1.example:7401", "--coordinator", "https://c.example:7400",
            "--tls-cert", kit.File("server.pem"), "--tls-key", kit.File("server.key"), "--tokens", kit.File("tokens.json"), "--token-file", kit.File("worker.token"))
            .WaitAsync(TimeSpan.FromSeconds(60));

        Assert.Equal(2, code);
        Assert.Contains("--advertise http://w1.example:7401/: the worker listens with TLS, so others reach it at https://", error, StringComparison.Ordinal);
    }

    [Fact]
    public async Task A_bad_token_file_is_an_input_error_naming_the_file_and_entry()
    {
        var kit = await Certs();
        var tokens = Path.Combine(_directory, "bad-tokens.json");
        await File.WriteAllTextAsync(tokens, """{"tokens": [{"name": "ops", "token": "0123456789abcdefXYZ", "roles": ["admin"]}]}""");
        var (code, _, error) = await CliRunner.RunAsync(
            "serve", "coordinator", "--listen", "0.0.0.0:7400", "--store", "sqlite:unused.db", "--tls-cert", kit.File("server.pem"), "--tls-key", kit.File("server.key"), "--tokens", tokens)
            .WaitAsync(TimeSpan.FromSeconds(60));

        Assert.Equal(1, code);
        Assert.Contains($"{tokens}: tokens[0].roles[0]: unknown role 'admin' (roles: submit, query, worker)", error, StringComparison.Ordinal);
        Assert.DoesNotContain("0123456789abcdefXYZ", error, StringComparison.Ordinal);
    }

    [Fact]
    public async Task A_client_will_not_send_its_token_in_clear_to_another_host()
    {
        var kit = await Certs();
        var (code, _, error) = await CliRunner.RunAsync("atlas", "--coordinator", "http://10.0.0.5:7400", "--token-file", kit.File("client.token")).WaitAsync(TimeSpan.FromSeconds(60));

        Assert.Equal(2, code);
        Assert.Contains("--coordinator 'http://10.0.0.5:7400' is plain http to a host other than loopback: the bearer token would travel unencrypted (use https)", error, StringComparison.Ordinal);
    }

    [Fact]
    public async Task A_missing_token_file_of_a_client_is_named()
    {
        var missing = Path.Combine(_directory, "client.token");
        var (code, _, error) = await CliRunner.RunAsync("ask", "--coordinator", "https://10.0.0.5:7400", "--atlas", "a1", "--at", "b=1", "--token-file", missing).WaitAsync(TimeSpan.FromSeconds(60));

        Assert.Equal(1, code);
        Assert.Contains($"{missing}: no such file", error, StringComparison.Ordinal);
    }

    [Fact]
    public async Task Certs_writes_a_ca_server_and_client_certificate_keys_readable_by_the_owner_only_and_a_token_file_of_digests()
    {
        var (code, output, error) = await CliRunner.RunAsync("certs", "--out", _directory, "--hosts", "coordinator.example,10.0.0.5", "--days", "3");

        Assert.True(code == 0, error);
        Assert.StartsWith("FOR TRYING IT OUT ONLY", output, StringComparison.Ordinal);
        var file = (string name) => Path.Combine(_directory, name);
        foreach (var secret in new[] { "server.key", "client.key", "client.token", "worker.token" })
        {
            Assert.True(OperatingSystem.IsWindows() || File.GetUnixFileMode(file(secret)) == (UnixFileMode.UserRead | UnixFileMode.UserWrite), $"{secret} is readable by others");
        }

        var (server, _) = CertificateFiles.LoadWithKey(file("server.pem"), file("server.key"));
        var (client, _) = CertificateFiles.LoadWithKey(file("client.pem"), file("client.key"));
        var roots = CertificateFiles.LoadBundle(file("ca.pem"));
        Assert.True(CertificateFiles.Chains(server, roots, CertificateFiles.ServerAuthentication));
        Assert.True(CertificateFiles.Chains(client, roots, CertificateFiles.ClientAuthentication));
        Assert.True(server.MatchesHostname("coordinator.example"));
        Assert.True(server.MatchesHostname("10.0.0.5"));
        Assert.InRange((server.NotAfter - server.NotBefore).TotalDays, 2.99, 3.01);

        var tokens = TokenTable.Load(file("tokens.json"));
        var clientToken = ClientSecurity.ReadToken(file("client.token"));
        Assert.Equal(["query", "submit"], tokens.Authenticate(clientToken)!.Roles.Order(StringComparer.Ordinal));
        Assert.Equal(["worker"], tokens.Authenticate(ClientSecurity.ReadToken(file("worker.token")))!.Roles);
        Assert.DoesNotContain(clientToken, await File.ReadAllTextAsync(file("tokens.json")), StringComparison.Ordinal);

        // A second run never overwrites.
        var (again, _, refusal) = await CliRunner.RunAsync("certs", "--out", _directory);
        Assert.Equal(2, again);
        Assert.Contains("already exist", refusal, StringComparison.Ordinal);
    }

    [Fact]
    public async Task Certs_refuses_a_host_that_is_neither_a_name_nor_an_address()
    {
        var (code, _, error) = await CliRunner.RunAsync("certs", "--out", _directory, "--hosts", "good.example,bad host!");

        Assert.Equal(2, code);
        Assert.Contains("--hosts: 'bad host!' is neither a DNS name nor an IP address", error, StringComparison.Ordinal);
    }

    private async Task<Kit> Certs()
    {
        var directory = Path.Combine(_directory, "kit");
        var (code, _, error) = await CliRunner.RunAsync("certs", "--out", directory);
        Assert.True(code == 0, error);
        return new Kit(directory);
    }

    private sealed record Kit(string Directory)
    {
        public string File(string name) => Path.Combine(Directory, name);
    }
}
