using FiberWorkers.Cluster.Security;
using FiberWorkers.Contracts.V1;
using Grpc.Core;
using Grpc.Net.Client;

namespace FiberWorkers.Cluster.Tests.Security;

/// <summary>Starts one secured cluster (loopback plaintext with tokens) for the whole class.</summary>
public sealed class TokenClusterFixture : IAsyncLifetime
{
    internal SecureCluster Cluster { get; private set; } = null!;

    public async Task InitializeAsync() => Cluster = await SecureCluster.StartAsync();

    public async Task DisposeAsync() => await Cluster.DisposeAsync();
}

/// <summary>
/// Every RPC of both services called with no token, an unknown token of the right length, and a token of each role
/// (and of all three): refused with Unauthenticated or PermissionDenied, or let through to the service, which then
/// answers the empty request (OK, or InvalidArgument naming a field: proof the call got past authentication).
/// </summary>
public sealed class RoleMatrixTests(TokenClusterFixture fixture) : IClassFixture<TokenClusterFixture>
{
    /// <summary>The roles each RPC admits, as issue 9 specifies them (not read from <see cref="Roles"/>).</summary>
    private static readonly Dictionary<string, string[]> Specified = new(StringComparer.Ordinal)
    {
        ["Coordinator/SubmitSweep"] = ["submit"],
        ["Coordinator/WatchSweep"] = ["submit", "query"],
        ["Coordinator/ListVersions"] = ["query"],
        ["Coordinator/FetchShard"] = ["query", "worker"],
        ["Coordinator/Ask"] = ["query"],
        ["Coordinator/ListWorkers"] = ["query"],
        ["Coordinator/RegisterWorker"] = ["worker"],
        ["Coordinator/Heartbeat"] = ["worker"],
        ["Coordinator/FetchSweepSetup"] = ["worker"],
        ["Coordinator/DeregisterWorker"] = ["worker"],
        ["Worker/RunTile"] = ["worker"],
        ["Worker/Resolve"] = ["worker", "query"],
    };

    /// <summary>Token name (null: none; "forged": unknown, same length as a real one) → the roles it holds.</summary>
    private static readonly Dictionary<string, string[]> Callers = new(StringComparer.Ordinal)
    {
        ["none"] = [],
        ["forged"] = [],
        ["submitter"] = ["submit"],
        ["reader"] = ["query"],
        ["workers"] = ["worker"],
        ["everything"] = ["submit", "query", "worker"],
    };

    public static TheoryData<string, string> Calls()
    {
        var data = new TheoryData<string, string>();
        foreach (var rpc in ServiceMethods().Select(m => m.Rpc))
        {
            foreach (var caller in Callers.Keys)
            {
                data.Add(rpc, caller);
            }
        }

        return data;
    }

    [Theory]
    [MemberData(nameof(Calls))]
    public async Task Each_rpc_admits_exactly_its_roles(string rpc, string caller)
    {
        var method = ServiceMethods().Single(m => m.Rpc == rpc);
        var token = caller switch
        {
            "none" => null,
            "forged" => Forged(SecureCluster.Tokens["everything"]),
            _ => SecureCluster.Tokens[caller],
        };
        var address = rpc.StartsWith("Worker/", StringComparison.Ordinal) ? fixture.Cluster.Worker.Address : fixture.Cluster.Coordinator.Address;

        var status = await CallAsync(address, method, token);

        var expected = token is null || caller == "forged" ? StatusCode.Unauthenticated
            : Callers[caller].Intersect(Specified[rpc]).Any() ? (StatusCode?)null
            : StatusCode.PermissionDenied;
        if (expected is { } refused)
        {
            Assert.Equal(refused, status.StatusCode);
            Assert.Equal(refused == StatusCode.Unauthenticated ? "a valid bearer token is required" : $"this token may not call {rpc.Split('/')[1]}", status.Detail);
        }
        else
        {
            Assert.True(status.StatusCode is StatusCode.OK or StatusCode.InvalidArgument, $"{rpc} by {caller}: {status}");
        }
    }

    [Fact]
    public void Every_rpc_of_both_services_is_in_the_specification_and_the_role_table()
    {
        var rpcs = ServiceMethods().Select(m => m.Rpc).ToList();
        Assert.Empty(rpcs.Except(Specified.Keys));
        foreach (var rpc in rpcs)
        {
            Assert.True(Roles.ByMethod.TryGetValue("/fiberworkers.v1." + rpc, out var roles), $"{rpc} has no roles");
            Assert.Equal(Specified[rpc].Order(StringComparer.Ordinal), roles.Order(StringComparer.Ordinal));
        }
    }

    [Fact]
    public async Task Health_answers_without_a_token_and_reflection_needs_any_valid_one()
    {
        using var channel = GrpcChannel.ForAddress(fixture.Cluster.Coordinator.Address);
        var health = new Grpc.Health.V1.Health.HealthClient(channel);
        var live = await health.CheckAsync(new Grpc.Health.V1.HealthCheckRequest());
        Assert.Equal(Grpc.Health.V1.HealthCheckResponse.Types.ServingStatus.Serving, live.Status);

        // ServerReflectionRequest { list_services = "" }: field 7, length 0.
        var reflection = new Method<byte[], byte[]>(MethodType.DuplexStreaming, "grpc.reflection.v1alpha.ServerReflection", "ServerReflectionInfo", Raw, Raw);
        Assert.Equal(StatusCode.Unauthenticated, (await DuplexAsync(fixture.Cluster.Coordinator.Address, reflection, null, [0x3A, 0x00])).Status.StatusCode);
        var (status, reply) = await DuplexAsync(fixture.Cluster.Coordinator.Address, reflection, SecureCluster.Tokens["submitter"], [0x3A, 0x00]);
        Assert.Equal(StatusCode.OK, status.StatusCode);
        Assert.Contains("fiberworkers.v1.Coordinator", System.Text.Encoding.UTF8.GetString(reply!), StringComparison.Ordinal);
    }

    private static readonly Marshaller<byte[]> Raw = Marshallers.Create(b => b, b => b);

    /// <summary>(RPC as "Service/Method", descriptor) for every method of both services.</summary>
    private static IEnumerable<(string Rpc, Google.Protobuf.Reflection.MethodDescriptor Descriptor)> ServiceMethods() =>
        Coordinator.Descriptor.Methods.Concat(Worker.Descriptor.Methods).Select(m => ($"{m.Service.Name}/{m.Name}", m));

    /// <summary>The real token with its last character changed: the same length, a different value.</summary>
    private static string Forged(string token) => token[..^1] + (token[^1] == 'A' ? 'B' : 'A');

    /// <summary>Calls a method with an empty request (its proto3 defaults) and returns the final status.</summary>
    private static async Task<Status> CallAsync(Uri address, (string Rpc, Google.Protobuf.Reflection.MethodDescriptor Descriptor) method, string? token)
    {
        using var channel = GrpcChannel.ForAddress(address);
        var type = method.Descriptor.IsServerStreaming ? MethodType.ServerStreaming : MethodType.Unary;
        var raw = new Method<byte[], byte[]>(type, method.Descriptor.Service.FullName, method.Descriptor.Name, Raw, Raw);
        var headers = new Metadata();
        if (token is not null)
        {
            headers.Add("authorization", $"Bearer {token}");
        }

        var options = new CallOptions(headers, DateTime.UtcNow.AddSeconds(30));
        try
        {
            if (type == MethodType.Unary)
            {
                await channel.CreateCallInvoker().AsyncUnaryCall(raw, null, options, []);
            }
            else
            {
                using var call = channel.CreateCallInvoker().AsyncServerStreamingCall(raw, null, options, []);
                while (await call.ResponseStream.MoveNext(CancellationToken.None))
                {
                }
            }

            return Status.DefaultSuccess;
        }
        catch (RpcException e)
        {
            return e.Status;
        }
    }

    private static async Task<(Status Status, byte[]? Reply)> DuplexAsync(Uri address, Method<byte[], byte[]> method, string? token, byte[] request)
    {
        using var channel = GrpcChannel.ForAddress(address);
        var headers = new Metadata();
        if (token is not null)
        {
            headers.Add("authorization", $"Bearer {token}");
        }

        try
        {
            using var call = channel.CreateCallInvoker().AsyncDuplexStreamingCall(method, null, new CallOptions(headers, DateTime.UtcNow.AddSeconds(30)));
            await call.RequestStream.WriteAsync(request);
            await call.RequestStream.CompleteAsync();
            byte[]? reply = null;
            while (await call.ResponseStream.MoveNext(CancellationToken.None))
            {
                reply ??= call.ResponseStream.Current;
            }

            return (Status.DefaultSuccess, reply);
        }
        catch (RpcException e)
        {
            return (e.Status, null);
        }
    }
}
