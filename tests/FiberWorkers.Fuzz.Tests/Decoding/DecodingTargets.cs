using FiberWorkers.Cluster.Contracts;
using FiberWorkers.Contracts.V1;
using FiberWorkers.Fuzz.Tests.Engine;
using Google.Protobuf;

namespace FiberWorkers.Fuzz.Tests.Decoding;

/// <summary>
/// Every request message of cluster.proto, and atlas.proto's <see cref="TileResult"/> (tile payloads travel between
/// coordinator and workers and are read back from stores), each with valid samples and its validator.
/// <para>
/// Each request runs through the checks its service calls (<see cref="RequestChecks"/>, under the servers' default
/// <see cref="RequestLimits"/>): the decoding fuzz runs them on every mutant that decodes and requires them to reject
/// only with an <c>InputException</c> or an <c>RpcException</c> of a status in <see cref="MessageFuzzTarget.RejectionCodes"/>.
/// ListWorkersRequest has no fields to check; TileResult is checked against its sweep (<c>TileChecks</c>), which a
/// decoded message alone does not give.
/// </para>
/// </summary>
internal static class DecodingTargets
{
    private static readonly Lazy<IReadOnlyList<MessageFuzzTarget>> Targets = new(Build);

    /// <summary>The fuzzed messages, by name.</summary>
    public static IReadOnlyList<MessageFuzzTarget> All => Targets.Value;

    public static MessageFuzzTarget Get(string name) =>
        All.FirstOrDefault(t => t.Name == name) ?? throw new ArgumentException($"no decoding target {name}", nameof(name));

    /// <summary>The limits the validators run under: the servers' defaults.</summary>
    internal static RequestLimits Limits => RequestLimits.Default;

    private static List<MessageFuzzTarget> Build()
    {
        var familyJson = File.ReadAllText(Path.Combine(FuzzPaths.Examples, "two-bus.json"));
        var settings = new SweepSettings
        {
            Divisions = { 6, 6 },
            LinesPerTile = 8,
            Seed = ulong.MaxValue,
            DeltaFraction = 0.05,
            RefineDepth = 2,
            SampleBudget = 100_000,
            StartMethod = "auto",
        };

        // two-bus has one parameter: a submission the validator accepts, so mutants reach the accepting path too.
        var oneAxis = settings.Clone();
        oneAxis.Divisions.Clear();
        oneAxis.Divisions.Add(6);
        var ask = new AskRequest
        {
            AtlasId = "a0123456789abcde",
            Version = 3,
            Point = { 0.3, -0.1, 0.2, -0.0, double.Epsilon, double.MaxValue },
            RequestId = "req-17",
            Verify = true,
        };
        return
        [
            new("SubmitSweepRequest", SubmitSweepRequest.Parser,
            [
                new SubmitSweepRequest { FamilyJson = familyJson, Settings = oneAxis, Source = "two-bus.json" },
                new SubmitSweepRequest { FamilyJson = familyJson, Settings = settings, Source = "two-bus.json" },
                new SubmitSweepRequest { FamilyJson = "{}", Settings = new SweepSettings() },
                new SubmitSweepRequest { FamilyJson = familyJson, Source = "é ✓ ünïcode.json" },
            ],
            Validate: m => RequestChecks.SubmitSweep((SubmitSweepRequest)m, Limits)),
            new("WatchSweepRequest", WatchSweepRequest.Parser,
                [new WatchSweepRequest { SweepId = 42 }, new WatchSweepRequest { SweepId = -1 }, new WatchSweepRequest { SweepId = long.MaxValue }],
                Validate: m => RequestChecks.WatchSweep((WatchSweepRequest)m)),
            new("ListVersionsRequest", ListVersionsRequest.Parser,
                [new ListVersionsRequest { AtlasId = "a0123456789abcde" }, new ListVersionsRequest()],
                Validate: m => RequestChecks.ListVersions((ListVersionsRequest)m)),
            new("ShardRequest", ShardRequest.Parser,
                [new ShardRequest { AtlasId = "a0123456789abcde", Version = 3, TileKey = "L0:3,1" }, new ShardRequest { TileKey = "L2:15,0,7" }],
                Validate: m => RequestChecks.FetchShard((ShardRequest)m)),
            new("AskRequest", AskRequest.Parser, [ask, new AskRequest { Point = { double.NaN, double.PositiveInfinity } }],
                Validate: m => RequestChecks.Ask((AskRequest)m, Limits)),
            new("RegisterWorkerRequest", RegisterWorkerRequest.Parser,
                [new RegisterWorkerRequest { WorkerId = "w-1", Address = "http://10.0.0.7:7401", Threads = 2 }, new RegisterWorkerRequest { Threads = -5 }],
                Validate: m => RequestChecks.RegisterWorker((RegisterWorkerRequest)m)),
            new("HeartbeatRequest", HeartbeatRequest.Parser,
                [new HeartbeatRequest { WorkerId = "w-1", TilesRunning = 2, ResolvesQueued = 1000 }, new HeartbeatRequest { TilesRunning = int.MinValue }],
                Validate: m => RequestChecks.Heartbeat((HeartbeatRequest)m)),
            new("DeregisterWorkerRequest", DeregisterWorkerRequest.Parser,
                [new DeregisterWorkerRequest { WorkerId = "w-1", Reason = "stopping" }, new DeregisterWorkerRequest { WorkerId = "w-1", Final = true }, new DeregisterWorkerRequest()],
                Validate: m => RequestChecks.DeregisterWorker((DeregisterWorkerRequest)m)),
            new("ListWorkersRequest", ListWorkersRequest.Parser, [new ListWorkersRequest()]),
            new("SweepSetupRequest", SweepSetupRequest.Parser,
                [new SweepSetupRequest { FamilyHash = new string('f', 64), Settings = settings }, new SweepSetupRequest()],
                Validate: m => RequestChecks.FetchSweepSetup((SweepSetupRequest)m, Limits)),
            new("TileTask", TileTask.Parser,
            [
                new TileTask { SweepId = 7, FamilyHash = new string('0', 64), Settings = settings, TileKey = "L1:2,3", Attempt = 1 },
                new TileTask { Settings = new SweepSettings { Divisions = { int.MaxValue, -1, 0 } } },
            ],
            Validate: m => RequestChecks.RunTile((TileTask)m, Limits)),
            new("ResolveRequest", ResolveRequest.Parser,
                [new ResolveRequest { Ask = ask, TileKey = "L0:1,1", Version = 3 }, new ResolveRequest { Ask = new AskRequest() }],
                Validate: m => RequestChecks.Resolve((ResolveRequest)m, Limits)),
            new("TileResult", TileResult.Parser, [SampleTile(), new TileResult()]),
        ];
    }

    private static TileResult SampleTile() => new()
    {
        FamilyHash = new string('c', 64),
        TileKey = "L0:1,2",
        Seed = 0x8000_0000_0000_0001UL,
        OptionsHash = new string('d', 64),
        Low = { -1, -0.5 },
        High = { 0, 0.5 },
        Lines = { new TileLine { Origin = { -0.5, 0 }, Direction = { 0.6, 0.8 }, SMin = -1, SMax = 1, Folds = 2 } },
        Samples =
        {
            new Sample { Point = { -0.5, 0 }, Label = 2, Kind = SampleKind.Midpoint, Line = 0, S = 0, Certified = true, Solutions = { 0.1, 0.2, -0.1, -0.2 } },
            new Sample { Point = { -0.4, 0.1 }, Label = 0, Kind = SampleKind.NearBoundary, Flag = "odd change across a fold" },
        },
        Crossings = { new Crossing { Point = { -0.45, 0.05 }, S = 0.07, Kind = CrossingKind.Fold, Solution = { 0.15, 0 }, Normal = { 1, 0 } } },
        Flags = { "an inconsistent count" },
    };
}
