using Google.Protobuf;
using FiberWorkers.Fuzz.Tests.Engine;
using Xunit.Abstractions;

namespace FiberWorkers.Fuzz.Tests.Decoding;

/// <summary>
/// Fuzzing the decoding of every request of cluster.proto and of atlas.proto's TileResult with mutants of valid
/// encodings; see <see cref="MessageProperty"/> for the property and <see cref="DecodingTargets"/> for where request
/// validators plug in.
/// </summary>
[Collection(FuzzCollection.Name)]
public sealed class DecodingFuzzTests(ITestOutputHelper output)
{
    public static TheoryData<string> Messages => [.. DecodingTargets.All.Select(t => t.Name)];

    [Theory]
    [MemberData(nameof(Messages))]
    public void Mutated_encodings_decode_or_raise_InvalidProtocolBufferException(string message)
    {
        var messageTarget = DecodingTargets.Get(message);
        var target = new FuzzTarget(
            $"decode-{message}", random => MessageProperty.Mutant(messageTarget, random), bytes => MessageProperty.Check(messageTarget, bytes), $".{message}.pb");

        var report = new FuzzRunner(FuzzSettings.Current).Run(target, FuzzSettings.Current.Share(0.35 / DecodingTargets.All.Count));

        output.WriteLine(report.ToString());
        FuzzAssert.NoFindings(report);
        FuzzAssert.Reached(report, "decoded", "rejected");
    }

    [Fact]
    public void Every_request_message_of_the_cluster_contract_is_fuzzed()
    {
        var requests = typeof(Contracts.V1.ClusterReflection).Assembly.GetTypes()
            .Where(t => t.Namespace == "FiberWorkers.Contracts.V1" && t.Name.EndsWith("Request", StringComparison.Ordinal))
            .Select(t => t.Name)
            .Append("TileTask")
            .Order(StringComparer.Ordinal);

        Assert.Subset(DecodingTargets.All.Select(t => t.Name).ToHashSet(), requests.ToHashSet());
        foreach (var target in DecodingTargets.All)
        {
            Assert.All(target.Samples, sample => Assert.Equal(target.Parser.ParseFrom(sample.ToByteArray()), sample));
        }
    }
}
