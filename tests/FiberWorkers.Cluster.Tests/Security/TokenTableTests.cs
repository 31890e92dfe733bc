using FiberWorkers.Algebra.Families;
using FiberWorkers.Cluster.Security;
using FiberWorkers.Contracts.V1;
using Grpc.Core;

namespace FiberWorkers.Cluster.Tests.Security;

/// <summary>The token file's checks, lookups by value, and logs that name tokens but never show them.</summary>
public sealed class TokenTableTests
{
    private const string Alice = "alice-token-0123456789abcdef";

    [Fact]
    public void A_token_is_found_by_its_value_and_a_token_of_the_same_length_is_not()
    {
        var table = TokenTable.Parse(
            $$"""{"tokens": [{"name": "alice", "token": "{{Alice}}", "roles": ["query"], "tenant": "acme"}, {"name": "bob", "sha256": "{{TokenTable.Digest("bob-token-0123456789abcdef")}}", "roles": ["submit", "query"]}]}""",
            "tokens.json");
        var alice = table.Authenticate(Alice);
        Assert.Equal(new[] { "query" }, alice!.Roles);
        Assert.Equal(("alice", "acme"), (alice.Name, alice.Tenant));
        Assert.Equal("bob", table.Authenticate("bob-token-0123456789abcdef")!.Name);
        Assert.Null(table.Authenticate(Alice[..^1] + "g"));
        Assert.Null(table.Authenticate(Alice.ToUpperInvariant()));
        Assert.Null(table.Authenticate(string.Empty));
    }

    public static TheoryData<string, string> BadFiles => new()
    {
        { """{"tokens": [{"name": "a", "token": "0123456789abcdef", "roles": ["admin"]}]}""", "tokens.json: tokens[0].roles[0]: unknown role 'admin' (roles: submit, query, worker)" },
        { """{"tokens": [{"name": "a", "token": "short", "roles": ["query"]}]}""", "tokens.json: tokens[0].token: the token is 5 characters long; tokens have at least 16" },
        { """{"tokens": [{"name": "a", "roles": ["query"]}]}""", "tokens.json: tokens[0]: 'a': give exactly one of token and sha256" },
        { """{"tokens": [{"name": "a", "sha256": "abc", "roles": ["query"]}]}""", "tokens.json: tokens[0].sha256: must be 64 hexadecimal digits" },
        { """{"tokens": [{"name": "w", "token": "0123456789abcdef", "roles": ["worker"], "tenant": "acme"}]}""", "tokens.json: tokens[0].tenant: 'w' has the worker role, which serves every tenant" },
        { """{"tokens": [{"name": "a", "token": "0123456789abcdef", "roles": ["query"]}, {"name": "a", "token": "fedcba9876543210", "roles": ["query"]}]}""", "tokens.json: tokens[1].name: 'a' is used by an earlier entry" },
        { """{"tokens": [{"name": "a", "token": "0123456789abcdef", "roles": ["query"]}, {"name": "b", "token": "0123456789abcdef", "roles": ["submit"]}]}""", "tokens.json: tokens[1]: 'b' has the same token as an earlier entry" },
        { """{"tokens": [{"name": "a", "token": "0123456789abcdef", "roles": ["query"], "tenant": "a/b"}]}""", "tokens.json: tokens[0].tenant: 'a/b' is not a tenant name" },
        { """{"tokens": [{"name": "a", "token": "0123456789abcdef", "roles": ["query"], "scope": "x"}]}""", "tokens.json: tokens[0].scope: unknown field" },
        { """{"tokens": []}""", "tokens.json: tokens: is empty" },
        { """{"tokens": [""", "tokens.json: line 1: not valid JSON" },
    };

    [Theory]
    [MemberData(nameof(BadFiles))]
    public void A_bad_token_file_is_refused_naming_the_entry_and_never_quoting_a_token(string text, string message)
    {
        var error = Assert.Throws<InputException>(() => TokenTable.Parse(text, "tokens.json"));
        Assert.StartsWith(message, error.Message, StringComparison.Ordinal);
        Assert.DoesNotContain("0123456789abcdef", error.Message, StringComparison.Ordinal);
    }

    [Fact]
    public async Task Logs_name_the_token_but_never_show_its_value_or_digest()
    {
        await using var cluster = await SecureCluster.StartAsync();
        using (var reader = cluster.Client("reader"))
        {
            // Refused (reader may not submit), then allowed: both leave the token's name at most.
            await Assert.ThrowsAsync<RpcException>(() => reader.Coordinator.SubmitSweepAsync(SecureCluster.SweepRequest()).ResponseAsync);
            await reader.VersionsAsync(string.Empty);
        }

        using (var submitter = cluster.Client("submitter"))
        {
            await submitter.Coordinator.SubmitSweepAsync(SecureCluster.SweepRequest());
        }

        using (var forged = new FiberWorkers.Cluster.Client.ClusterClient(cluster.Coordinator.Address, security: new ClientSecurity(token: SecureCluster.Tokens["reader"][..^1] + "~")))
        {
            await Assert.ThrowsAsync<RpcException>(() => forged.VersionsAsync(string.Empty));
        }

        var log = cluster.Log;
        Assert.Contains("\"TokenName\":\"reader\"", log, StringComparison.Ordinal);
        Assert.Contains("no valid bearer token", log, StringComparison.Ordinal);
        foreach (var token in SecureCluster.Tokens.Values)
        {
            Assert.DoesNotContain(token, log, StringComparison.Ordinal);
            Assert.DoesNotContain(token[..12], log, StringComparison.Ordinal);
            Assert.DoesNotContain(TokenTable.Digest(token), log, StringComparison.Ordinal);
        }

        Assert.DoesNotContain(SecureCluster.Tokens["reader"][..^1], log, StringComparison.Ordinal);
    }

    [Fact]
    public void Client_settings_never_print_their_token()
    {
        var security = new ClientSecurity(token: SecureCluster.Tokens["workers"]);
        var server = new ServerSecurity { Outbound = security };
        Assert.DoesNotContain(SecureCluster.Tokens["workers"], security.ToString(), StringComparison.Ordinal);
        Assert.DoesNotContain(SecureCluster.Tokens["workers"], server.ToString(), StringComparison.Ordinal);
        Assert.DoesNotContain(SecureCluster.Tokens["workers"], (FiberWorkers.Cluster.Coordination.CoordinatorOptions.Default with { Security = server }).ToString(), StringComparison.Ordinal);
        Assert.Contains("token: given", server.Describe(), StringComparison.Ordinal);
    }
}
