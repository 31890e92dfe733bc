using FiberWorkers.Atlas.Stores;
using FiberWorkers.Atlas.Sweeps;
using FiberWorkers.Cluster.Client;
using FiberWorkers.Cluster.Contracts;
using FiberWorkers.Cluster.Coordination;
using FiberWorkers.Cluster.Hosting;
using FiberWorkers.Cluster.Tests.Support;
using FiberWorkers.Cluster.Workers;
using FiberWorkers.Contracts.V1;
using FiberWorkers.Testing;
using Google.Protobuf;
using Grpc.Core;
using Grpc.Net.Client;

namespace FiberWorkers.Cluster.Tests.Limits;

/// <summary>
/// The message size limit on what the coordinator sends: a shard is measured before it is sent, and a coordinator
/// whose max-message-bytes is the shard's size serves it, one whose limit is a byte less refuses with
/// ResourceExhausted naming the limit and the shard's size (both over the store a real sweep committed).
/// </summary>
public sealed class ShardSizeLimitTests
{
    [Fact]
    public async Task A_shard_of_exactly_the_limit_is_served_and_one_byte_over_it_is_refused_by_name()
    {
        using var directory = new TempDirectory();
        await using var log = new Serilog.LoggerConfiguration().CreateLogger();
        var listen = ListenAddress.Parse("127.0.0.1:0", "test");
        var family = TestFamilies.Example("two-bus");
        var options = new SweepOptions { Divisions = [3], LinesPerTile = 2, Seed = 9, MaxDegreeOfParallelism = 1 };
        string atlasId;
        using (var ledger = SqliteAtlasStore.Open(directory.File("shards.db")))
        {
            var coordinator = await CoordinatorServer.StartAsync(ledger, CoordinatorOptions.Default with { StartFiberThreads = 1 }, listen, log);
            await using (coordinator)
            {
                var worker = await WorkerServer.StartAsync(new WorkerOptions { Coordinator = coordinator.Address, Threads = 1, Id = "shards" }, listen, log);
                await using (worker)
                {
                    using var client = new ClusterClient(coordinator.Address);
                    var request = new SubmitSweepRequest { FamilyJson = JsonFormatter.Default.Format(family.Message), Settings = Conversions.ToSettings(options) };
                    atlasId = (await client.SweepAsync(request).WaitAsync(TimeSpan.FromSeconds(120))).AtlasId;
                }
            }
        }

        var shardRequest = new ShardRequest { AtlasId = atlasId, TileKey = "L0:1" };
        var size = (await FetchAsync(directory, log, int.MaxValue, shardRequest)).CalculateSize();
        Assert.Equal(size, (await FetchAsync(directory, log, size, shardRequest)).CalculateSize());

        var error = await Assert.ThrowsAsync<RpcException>(() => FetchAsync(directory, log, size - 1, shardRequest));
        Assert.Equal(StatusCode.ResourceExhausted, error.StatusCode);
        Assert.Equal($"shard L0:1 of atlas {atlasId}: {size} bytes exceeds the limit max-message-bytes = {size - 1}", error.Status.Detail);
    }

    /// <summary>The shard from a coordinator over the committed store, with the given message limit.</summary>
    private static async Task<TileShard> FetchAsync(TempDirectory directory, Serilog.ILogger log, int maxMessageBytes, ShardRequest request)
    {
        using var ledger = SqliteAtlasStore.Open(directory.File("shards.db"));
        var coordinator = await CoordinatorServer.StartAsync(
            ledger, CoordinatorOptions.Default with { StartFiberThreads = 1, MaxMessageBytes = maxMessageBytes }, ListenAddress.Parse("127.0.0.1:0", "test"), log);
        await using (coordinator)
        {
            using var channel = GrpcChannel.ForAddress(coordinator.Address, new GrpcChannelOptions { MaxReceiveMessageSize = null });
            return await new Coordinator.CoordinatorClient(channel).FetchShardAsync(request);
        }
    }
}
