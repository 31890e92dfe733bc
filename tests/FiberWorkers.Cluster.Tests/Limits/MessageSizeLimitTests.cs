using FiberWorkers.Algebra.Families;
using FiberWorkers.Cluster.Contracts;
using FiberWorkers.Cluster.Coordination;
using FiberWorkers.Testing;
using System.Text;
using FiberWorkers.Contracts.V1;
using Google.Protobuf;
using Grpc.Core;

namespace FiberWorkers.Cluster.Tests.Limits;

/// <summary>
/// The message size limit through a real coordinator: a request of exactly max-message-bytes is read and accepted,
/// one byte more is refused with ResourceExhausted naming the limit and the message's size, before it is read.
/// </summary>
public sealed class MessageSizeLimitTests : IAsyncLifetime
{
    private const int MaxMessageBytes = 8192;

    private LimitCluster _cluster = null!;

    public async Task InitializeAsync() => _cluster = await LimitCluster.StartAsync(CoordinatorOptions.Default with
    {
        MaxMessageBytes = MaxMessageBytes,
        Limits = RequestLimits.Default with { Family = FamilyLimits.Default with { MaxFileBytes = MaxMessageBytes } },
    });

    public async Task DisposeAsync() => await _cluster.DisposeAsync();

    [Fact]
    public async Task A_request_of_the_largest_size_is_accepted_and_one_byte_more_is_refused_by_name()
    {
        var client = _cluster.Client();
        var family = TestFamilies.Json("line", ["x"], ["x - P"], [("P", -1, 1)]);

        var atLimit = Request(family, MaxMessageBytes);
        Assert.Equal(MaxMessageBytes, atLimit.CalculateSize());
        Assert.True((await client.SubmitSweepAsync(atLimit)).SweepId > 0);

        var over = Request(family, MaxMessageBytes + 1);
        Assert.Equal(MaxMessageBytes + 1, over.CalculateSize());
        await LimitCluster.Refused(StatusCode.ResourceExhausted, () => client.SubmitSweepAsync(over).ResponseAsync,
            $"request: a message of {MaxMessageBytes + 1} bytes exceeds the limit max-message-bytes = {MaxMessageBytes}");

        // The connection stays usable after a refusal.
        Assert.True((await client.SubmitSweepAsync(atLimit)).SweepId > 0);
    }

    /// <summary>A submission whose encoding is exactly <paramref name="size"/> bytes (the family's description pads it).</summary>
    private static SubmitSweepRequest Request(string family, int size)
    {
        var request = LimitCluster.Sweep(family, [2]);
        var bytes = Encoding.UTF8.GetByteCount(family) + "\"description\":\"\",".Length;
        while (request.CalculateSize() < size)
        {
            request.FamilyJson = LimitCluster.Padded(family, bytes++);
        }

        return request;
    }
}
