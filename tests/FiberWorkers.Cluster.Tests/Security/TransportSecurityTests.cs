using System.Security.Cryptography.X509Certificates;
using FiberWorkers.Cluster.Client;
using FiberWorkers.Cluster.Coordination;
using FiberWorkers.Cluster.Hosting;
using FiberWorkers.Cluster.Security;
using FiberWorkers.Contracts.V1;
using FiberWorkers.Testing;
using Grpc.Core;

namespace FiberWorkers.Cluster.Tests.Security;

/// <summary>
/// TLS and mutual TLS with certificates made by <see cref="CertificateKit"/> in the test: a plaintext client cannot
/// talk to a TLS listener, a client without a certificate or with one of another CA is refused under mutual TLS, a
/// client that does not trust the server's CA refuses it, and a trusted client runs a sweep and asks end to end.
/// </summary>
public sealed class TransportSecurityTests
{
    [Fact]
    public async Task A_trusted_client_runs_a_sweep_and_asks_over_mutual_tls_with_tokens()
    {
        await using var cluster = await SecureCluster.StartAsync(tls: true, mutual: true);
        Assert.Equal("https", cluster.Coordinator.Address.Scheme);
        Assert.Equal("https", cluster.Worker.Address.Scheme);
        using var client = cluster.Client("everything");
        var workers = (await client.Coordinator.ListWorkersAsync(new ListWorkersRequest())).Workers;
        Assert.StartsWith("https://127.0.0.1:", Assert.Single(workers).Address, StringComparison.Ordinal);

        var outcome = await client.SweepAsync(SecureCluster.SweepRequest()).WaitAsync(TimeSpan.FromSeconds(120));
        Assert.Equal(4, outcome.Tiles);

        // x^3 + b x + c with b = -1, c = 0.1: three real roots (the discriminant -4b^3 - 27c^2 = 3.73 > 0).
        var ask = new AskRequest { AtlasId = outcome.AtlasId };
        ask.Point.Add([-1.0, 0.1]);
        var routed = await client.AskAsync(ask);
        var direct = await client.AskDirectAsync(ask);
        Assert.Equal(3, routed.RealCount);
        Assert.Equal(3, direct.RealCount);
        foreach (var solution in routed.Solutions)
        {
            var x = solution.Values[0];
            Assert.True(Math.Abs((x * x * x) - x + 0.1) < 1e-9, $"residual at {x}");
        }
    }

    [Fact]
    public async Task Servers_called_by_address_are_checked_against_the_configured_server_name()
    {
        // The certificate names only "fiber-node", as one certificate for workers reached at changing pod IPs would.
        await using var cluster = await SecureCluster.StartAsync(tls: true, mutual: true, serverName: "fiber-node");
        using var client = cluster.Client("everything");
        var outcome = await client.SweepAsync(SecureCluster.SweepRequest()).WaitAsync(TimeSpan.FromSeconds(120));
        var ask = new AskRequest { AtlasId = outcome.AtlasId };
        ask.Point.Add([-1.0, 0.1]);
        Assert.Equal(3, (await client.AskDirectAsync(ask)).RealCount);

        var roots = new X509Certificate2Collection(cluster.Kit!.Authority);
        var token = SecureCluster.Tokens["everything"];
        using var byAddress = new ClusterClient(cluster.Coordinator.Address, security: new ClientSecurity(roots, cluster.Kit.Client, token));
        await AssertTransportRefused(() => byAddress.VersionsAsync(string.Empty));
        using var otherName = new ClusterClient(cluster.Coordinator.Address, security: new ClientSecurity(roots, cluster.Kit.Client, token, "another-node"));
        await AssertTransportRefused(() => otherName.VersionsAsync(string.Empty));
    }

    [Fact]
    public async Task A_plaintext_client_cannot_call_a_tls_listener()
    {
        await using var cluster = await SecureCluster.StartAsync(tls: true);
        var plain = new UriBuilder(cluster.Coordinator.Address) { Scheme = "http" }.Uri;
        using var client = new ClusterClient(plain, security: new ClientSecurity(token: SecureCluster.Tokens["everything"]));
        var error = await Assert.ThrowsAsync<RpcException>(() => client.VersionsAsync(string.Empty));
        Assert.NotEqual(StatusCode.OK, error.StatusCode);
        Assert.NotEqual(StatusCode.PermissionDenied, error.StatusCode);

        // The same call over TLS works (the failure above is the transport's, not the token's).
        using var secure = cluster.Client("everything");
        Assert.NotNull(await secure.VersionsAsync(string.Empty));
    }

    [Fact]
    public async Task Under_mutual_tls_clients_without_a_certificate_or_with_one_of_another_ca_are_refused()
    {
        await using var cluster = await SecureCluster.StartAsync(tls: true, mutual: true);
        using var stranger = CertificateKit.Create(["localhost", "127.0.0.1"], 1, "stranger");
        var roots = new X509Certificate2Collection(cluster.Kit!.Authority);
        var token = SecureCluster.Tokens["everything"];

        using var without = new ClusterClient(cluster.Coordinator.Address, security: new ClientSecurity(roots, null, token));
        await AssertTransportRefused(() => without.VersionsAsync(string.Empty));
        using var untrusted = new ClusterClient(cluster.Coordinator.Address, security: new ClientSecurity(roots, stranger.Client, token));
        await AssertTransportRefused(() => untrusted.VersionsAsync(string.Empty));

        // A worker's listener refuses the stranger too.
        using var channel = ChannelSecurity.Open(cluster.Worker.Address, new ClientSecurity(roots, stranger.Client, token), 1 << 20);
        await AssertTransportRefused(async () => await new Worker.WorkerClient(channel).ResolveAsync(new ResolveRequest()));

        using var trusted = cluster.Client("everything");
        Assert.NotNull(await trusted.VersionsAsync(string.Empty));
    }

    [Fact]
    public async Task The_admin_listener_serves_tls_without_asking_probes_for_a_client_certificate()
    {
        using var kit = CertificateKit.Create(["localhost", "127.0.0.1"], 1);
        var roots = new X509Certificate2Collection(kit.Authority);
        using var log = new Serilog.LoggerConfiguration().CreateLogger();
        var loopback = new ListenAddress(System.Net.IPAddress.Loopback, 0);
        await using var host = await GrpcHost.StartAsync(
            new HostSettings { Listen = loopback, AdminListen = loopback, Logger = log, Security = new ServerSecurity { Tls = ServerTls.FromCertificates(kit.Server, roots) } },
            _ => { },
            _ => { });
        Assert.Equal("https", host.AdminAddress!.Scheme);
        using var handler = new HttpClientHandler { ServerCertificateCustomValidationCallback = (_, certificate, _, _) => certificate is not null && CertificateFiles.Chains(certificate, roots, CertificateFiles.ServerAuthentication) };
        using var http = new HttpClient(handler) { BaseAddress = host.AdminAddress };
        Assert.Equal(System.Net.HttpStatusCode.OK, (await http.GetAsync(new Uri("/healthz", UriKind.Relative))).StatusCode);

        // The gRPC listener of the same host still wants the client certificate.
        using var channel = ChannelSecurity.Open(host.Address, new ClientSecurity(roots), 1 << 20);
        await AssertTransportRefused(async () => await new Grpc.Health.V1.Health.HealthClient(channel).CheckAsync(new Grpc.Health.V1.HealthCheckRequest()));
    }

    [Fact]
    public async Task A_client_refuses_a_server_whose_certificate_is_not_from_its_ca()
    {
        await using var cluster = await SecureCluster.StartAsync(tls: true);
        using var other = CertificateKit.Create(["localhost", "127.0.0.1"], 1, "other");
        using var client = new ClusterClient(cluster.Coordinator.Address, security: new ClientSecurity(new X509Certificate2Collection(other.Authority), null, SecureCluster.Tokens["everything"]));
        await AssertTransportRefused(() => client.VersionsAsync(string.Empty));
    }

    [Fact]
    public async Task A_server_refuses_to_listen_outside_loopback_without_tls_or_tokens()
    {
        using var log = new Serilog.LoggerConfiguration().CreateLogger();
        using var directory = new Support.TempDirectory();
        using var ledger = FiberWorkers.Atlas.Stores.SqliteAtlasStore.Open(directory.File("c.db"));
        var anywhere = ListenAddress.Parse("0.0.0.0:0", "test");
        var plain = await Assert.ThrowsAsync<InvalidOperationException>(() => CoordinatorServer.StartAsync(ledger, CoordinatorOptions.Default, anywhere, log));
        Assert.Contains("needs TLS", plain.Message, StringComparison.Ordinal);

        using var kit = CertificateKit.Create(["localhost"], 1);
        var noTokens = CoordinatorOptions.Default with { Security = new ServerSecurity { Tls = ServerTls.FromCertificates(kit.Server) } };
        var open = await Assert.ThrowsAsync<InvalidOperationException>(() => CoordinatorServer.StartAsync(ledger, noTokens, anywhere, log));
        Assert.Contains("needs a token file", open.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void A_token_is_never_sent_in_clear_to_a_host_other_than_loopback()
    {
        var security = new ClientSecurity(token: SecureCluster.Tokens["reader"]);
        Assert.Contains("unencrypted", ChannelSecurity.Problem(new Uri("http://10.1.2.3:7400"), security), StringComparison.Ordinal);
        Assert.Contains("unencrypted", ChannelSecurity.Problem(new Uri("http://coordinator.example:7400"), security), StringComparison.Ordinal);
        Assert.Null(ChannelSecurity.Problem(new Uri("http://127.0.0.1:7400"), security));
        Assert.Null(ChannelSecurity.Problem(new Uri("http://[::1]:7400"), security));
        Assert.Null(ChannelSecurity.Problem(new Uri("https://10.1.2.3:7400"), security));
        Assert.Null(ChannelSecurity.Problem(new Uri("http://10.1.2.3:7400"), ClientSecurity.None));
    }

    [Fact]
    public void The_kit_chains_each_certificate_to_its_ca_for_its_purpose_only()
    {
        using var kit = CertificateKit.Create(["coordinator.example", "10.0.0.5"], 2);
        var roots = new X509Certificate2Collection(kit.Authority);
        Assert.True(CertificateFiles.Chains(kit.Server, roots, CertificateFiles.ServerAuthentication));
        Assert.True(CertificateFiles.Chains(kit.Server, roots, CertificateFiles.ClientAuthentication));
        Assert.True(CertificateFiles.Chains(kit.Client, roots, CertificateFiles.ClientAuthentication));
        Assert.False(CertificateFiles.Chains(kit.Client, roots, CertificateFiles.ServerAuthentication));
        using var other = CertificateKit.Create(["localhost"], 1, "other");
        Assert.False(CertificateFiles.Chains(kit.Server, new X509Certificate2Collection(other.Authority), CertificateFiles.ServerAuthentication));
        Assert.True(kit.Server.MatchesHostname("coordinator.example"));
        Assert.True(kit.Server.MatchesHostname("10.0.0.5"));
        Assert.False(kit.Server.MatchesHostname("elsewhere.example"));
        Assert.InRange((kit.Server.NotAfter - kit.Server.NotBefore).TotalDays, 1.99, 2.01);
    }

    private static async Task AssertTransportRefused(Func<Task> call)
    {
        var error = await Assert.ThrowsAsync<RpcException>(call);
        Assert.True(error.StatusCode is StatusCode.Unavailable or StatusCode.Internal, $"expected a transport failure, got {error.Status}");
    }
}
