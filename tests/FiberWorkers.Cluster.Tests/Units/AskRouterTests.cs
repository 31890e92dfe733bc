using FiberWorkers.Atlas.Stores;
using FiberWorkers.Cluster.Coordination;
using FiberWorkers.Cluster.Tests.Support;
using FiberWorkers.Contracts.V1;
using Grpc.Core;

namespace FiberWorkers.Cluster.Tests.Units;

/// <summary>The coordinator's ask router sheds load before it does any work for the ask.</summary>
public sealed class AskRouterTests
{
    [Fact]
    public async Task With_every_worker_queue_full_an_ask_is_refused_before_the_store_is_read_and_with_room_it_is_routed()
    {
        // Arrange: two registered workers (never called), each with its queue of two asks full, over an empty store, so
        // that any read of the store would answer NotFound for the atlas asked about.
        using var directory = new TempDirectory();
        using var store = SqliteAtlasStore.Open(directory.File("empty.db"));
        using var log = new Serilog.LoggerConfiguration().CreateLogger();
        var options = CoordinatorOptions.Default with { AskQueuePerWorker = 2 };
        using var pool = new WorkerPool(options, log);
        pool.Register("w1", new Uri("http://127.0.0.1:9"), 1);
        pool.Register("w2", new Uri("http://127.0.0.1:9"), 1);
        foreach (var worker in pool.Live())
        {
            Assert.True(worker.TryEnterAsk(2) && worker.TryEnterAsk(2));
            Assert.False(worker.TryEnterAsk(2));
        }

        var router = new AskRouter(pool, new AtlasCatalog(store), options, log);
        var ask = new AskRequest { AtlasId = "a0123456789abcde", Point = { 0.5, 0.5 } };

        // Act and assert: refused as overload, not as an unknown atlas (the store was not asked).
        var refused = await Assert.ThrowsAsync<RpcException>(() => router.AskAsync(ask, CancellationToken.None));
        Assert.Equal(StatusCode.ResourceExhausted, refused.StatusCode);
        Assert.Contains("already has 2 asks waiting (the per-worker queue limit)", refused.Status.Detail, StringComparison.Ordinal);

        // One worker with room again: the ask goes on to the catalog, which knows no such atlas.
        pool.Live()[0].ExitAsk();
        var routed = await Assert.ThrowsAsync<RpcException>(() => router.AskAsync(ask, CancellationToken.None));
        Assert.Equal(StatusCode.NotFound, routed.StatusCode);
    }
}
