using FiberWorkers.Cluster.Security;
using FiberWorkers.Contracts.V1;
using Grpc.Core;

namespace FiberWorkers.Cluster.Tests.Security;

/// <summary>
/// Tenants: a sweep submitted with a tenant's token lands in that tenant's namespace; another tenant can neither list,
/// ask, fetch shards of nor watch it — not even by its id — and its own sweep of the same family is a separate atlas.
/// A token without a tenant sees every namespace.
/// </summary>
public sealed class TenantScopeTests
{
    [Fact]
    public async Task A_tenant_cannot_list_ask_fetch_or_watch_another_tenants_atlas()
    {
        await using var cluster = await SecureCluster.StartAsync();
        using var acme = cluster.Client("acme");
        using var globex = cluster.Client("globex");
        using var operations = cluster.Client("everything");

        var ticket = await acme.Coordinator.SubmitSweepAsync(SecureCluster.SweepRequest());
        Assert.DoesNotContain('/', ticket.AtlasId);
        var outcome = await acme.SweepAsync(SecureCluster.SweepRequest()).WaitAsync(TimeSpan.FromSeconds(120));
        Assert.Equal(ticket.AtlasId, outcome.AtlasId);

        // acme sees its atlas under the id it was given; the store (and an operator) knows it as acme/ID.
        Assert.Equal([ticket.AtlasId], (await acme.VersionsAsync(string.Empty)).Select(v => v.AtlasId).Distinct());
        Assert.Equal([$"acme/{ticket.AtlasId}"], (await operations.VersionsAsync(string.Empty)).Select(v => v.AtlasId).Distinct());
        var ask = new AskRequest { AtlasId = ticket.AtlasId };
        ask.Point.Add([-1.0, 0.1]);
        var answer = await acme.AskAsync(ask);
        Assert.Equal((ticket.AtlasId, 3), (answer.AtlasId, answer.RealCount));
        Assert.Equal(3, (await acme.AskDirectAsync(ask)).RealCount);

        // globex: nothing listed, the id unknown everywhere.
        Assert.Empty(await globex.VersionsAsync(string.Empty));
        var unknown = await Assert.ThrowsAsync<RpcException>(() => globex.VersionsAsync(ticket.AtlasId));
        Assert.Equal((StatusCode.NotFound, $"atlas_id: no atlas 'globex/{ticket.AtlasId}' in the store"), (unknown.StatusCode, unknown.Status.Detail));
        Assert.Equal(StatusCode.NotFound, (await Assert.ThrowsAsync<RpcException>(() => globex.AskAsync(ask))).StatusCode);
        Assert.Equal(StatusCode.NotFound, (await Assert.ThrowsAsync<RpcException>(() => globex.AskDirectAsync(ask))).StatusCode);
        Assert.Equal(StatusCode.NotFound, (await Assert.ThrowsAsync<RpcException>(
            () => globex.Coordinator.FetchShardAsync(new ShardRequest { AtlasId = ticket.AtlasId, TileKey = "L0:0,0" }).ResponseAsync)).StatusCode);
        Assert.Equal(StatusCode.NotFound, (await Assert.ThrowsAsync<RpcException>(
            () => globex.Coordinator.FetchShardAsync(new ShardRequest { AtlasId = $"acme/{ticket.AtlasId}", TileKey = "L0:0,0" }).ResponseAsync)).StatusCode);
        using (var watch = globex.Coordinator.WatchSweep(new WatchSweepRequest { SweepId = ticket.SweepId }))
        {
            var error = await Assert.ThrowsAsync<RpcException>(() => watch.ResponseStream.MoveNext(CancellationToken.None));
            Assert.Equal((StatusCode.NotFound, $"sweep_id: no sweep {ticket.SweepId}"), (error.StatusCode, error.Status.Detail));
        }

        // Its own sweep of the same family is its own atlas, with the same content.
        var own = await globex.SweepAsync(SecureCluster.SweepRequest()).WaitAsync(TimeSpan.FromSeconds(120));
        Assert.Equal((ticket.AtlasId, outcome.ContentHash), (own.AtlasId, own.ContentHash));
        Assert.Equal(1, own.AtlasVersion);
        Assert.Equal([$"acme/{ticket.AtlasId}", $"globex/{ticket.AtlasId}"], (await operations.VersionsAsync(string.Empty)).Select(v => v.AtlasId).Distinct().Order(StringComparer.Ordinal));
        Assert.Single(await globex.VersionsAsync(string.Empty));
    }

    [Fact]
    public void Store_ids_map_in_and_out_of_a_tenants_namespace()
    {
        var acme = new Caller("a", "acme", new HashSet<string> { Roles.Query });
        Assert.Equal("acme/a123", TenantScope.Inside(acme, "a123"));
        Assert.Equal("a123", TenantScope.Outside(acme, "acme/a123"));
        Assert.Equal(string.Empty, TenantScope.Inside(acme, string.Empty));
        Assert.True(TenantScope.Sees(acme, "acme/a123"));
        Assert.False(TenantScope.Sees(acme, "acmex/a123"));
        Assert.False(TenantScope.Sees(acme, "a123"));
        Assert.True(TenantScope.Sees(null, "acme/a123"));
        Assert.Equal("acme/", TenantScope.NamespaceOf("acme/a123"));
        Assert.Null(TenantScope.NamespaceOf("a123"));
    }
}
