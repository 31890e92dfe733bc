using FiberWorkers.Algebra.Families;
using FiberWorkers.Cluster.Contracts;
using FiberWorkers.Cluster.Coordination;
using FiberWorkers.Contracts.V1;
using FiberWorkers.Testing;
using Grpc.Core;

namespace FiberWorkers.Cluster.Tests.Limits;

/// <summary>
/// Each size and shape limit of a sweep submission, through a real coordinator (no workers, so accepted sweeps just
/// wait): a request at the limit is accepted, one past it is refused with InvalidArgument naming the limit, its value
/// and the request's value.
/// </summary>
public sealed class SweepLimitTests : IAsyncLifetime
{
    /// <summary>Small limits, so requests just past them stay cheap.</summary>
    private static readonly RequestLimits Limits = new()
    {
        Family = FamilyLimits.Default with { MaxFileBytes = 2000, MaxUnknowns = 2, MaxParameters = 1, MaxDegree = 3, MaxExpressionNodes = 4 },
        MaxPaths = 3,
        MaxTilesPerSweep = 12,
        MaxSamplesPerSweep = 48,
        MaxConcurrentSweeps = 1000,
    };

    private static readonly (string, double, double)[] OneParameter = [("P", -1, 1)];

    /// <summary>x³ − P: one unknown, one parameter, degree 3, Bézout number 3, four expression nodes (x, ^, P, −).</summary>
    private static readonly string Cubic = TestFamilies.Json("cubic", ["x"], ["x^3 - P"], OneParameter);

    private LimitCluster _cluster = null!;
    private Coordinator.CoordinatorClient _client = null!;

    public async Task InitializeAsync()
    {
        _cluster = await LimitCluster.StartAsync(CoordinatorOptions.Default with { Limits = Limits });
        _client = _cluster.Client();
    }

    public async Task DisposeAsync() => await _cluster.DisposeAsync();

    [Fact]
    public async Task Tiles_per_sweep_at_the_limit_pass_and_one_more_is_refused()
    {
        var reply = await _client.SubmitSweepAsync(LimitCluster.Sweep(Cubic, [12]));
        Assert.True(reply.SweepId > 0);

        await LimitCluster.Refused(StatusCode.InvalidArgument, () => _client.SubmitSweepAsync(LimitCluster.Sweep(Cubic, [13])).ResponseAsync,
            "sweep: 13 tiles exceeds the limit max-tiles-per-sweep = 12");
    }

    [Fact]
    public async Task Refinement_counts_its_worst_case_growth_unless_a_sample_budget_bounds_it()
    {
        // 3 tiles, refined to depth 1 in one parameter: at most 3·2 = 6 more, 9 in all.
        await _client.SubmitSweepAsync(LimitCluster.Sweep(Cubic, [3], refineDepth: 1));

        // Depth 2: 3 + 6 + 12 = 21 tiles may be planned.
        await LimitCluster.Refused(StatusCode.InvalidArgument, () => _client.SubmitSweepAsync(LimitCluster.Sweep(Cubic, [3], refineDepth: 2)).ResponseAsync,
            "sweep: 21 tiles (3 at level 0 and up to 18 more by refining to depth 2", "max-tiles-per-sweep = 12");

        // A budget of 9 samples lets refinement add at most 9 tiles: 12 in all.
        await _client.SubmitSweepAsync(LimitCluster.Sweep(Cubic, [3], refineDepth: 2, sampleBudget: 9));
        await LimitCluster.Refused(StatusCode.InvalidArgument, () => _client.SubmitSweepAsync(LimitCluster.Sweep(Cubic, [3], refineDepth: 2, sampleBudget: 10)).ResponseAsync,
            "sweep: 13 tiles (3 at level 0 and up to 10 more by refining to depth 2 within the sample budget 10)", "max-tiles-per-sweep = 12");
    }

    [Fact]
    public async Task Samples_per_sweep_at_the_limit_pass_and_one_line_more_is_refused()
    {
        // 6 tiles × 4 lines × 2 samples per line = 48.
        await _client.SubmitSweepAsync(LimitCluster.Sweep(Cubic, [6], lines: 4));
        await LimitCluster.Refused(StatusCode.InvalidArgument, () => _client.SubmitSweepAsync(LimitCluster.Sweep(Cubic, [6], lines: 5)).ResponseAsync,
            "sweep: at least 60 samples (6 tiles × 5 lines × 2 samples per line) exceeds the limit max-samples-per-sweep = 48");

        await _client.SubmitSweepAsync(LimitCluster.Sweep(Cubic, [2], sampleBudget: 48));
        await LimitCluster.Refused(StatusCode.InvalidArgument, () => _client.SubmitSweepAsync(LimitCluster.Sweep(Cubic, [2], sampleBudget: 49)).ResponseAsync,
            "sweep: sample_budget 49 exceeds the limit max-samples-per-sweep = 48");
    }

    [Fact]
    public async Task Paths_per_solve_at_the_limit_pass_and_a_larger_Bezout_number_is_refused()
    {
        await _client.SubmitSweepAsync(LimitCluster.Sweep(Cubic, [2]));

        // Two quadrics: Bézout number 4, solved by total degree.
        var quadrics = TestFamilies.Json("quadrics", ["x", "y"], ["x^2 - P", "y^2 - 1"], OneParameter);
        await LimitCluster.Refused(StatusCode.InvalidArgument, () => _client.SubmitSweepAsync(LimitCluster.Sweep(quadrics, [2])).ResponseAsync,
            "sweep: each solve of the family tracks 4 paths (the Bézout number; the start fiber is computed by total degree) exceeds the limit max-paths = 3");
    }

    [Fact]
    public async Task Family_bytes_at_the_limit_pass_and_one_byte_more_is_refused()
    {
        await _client.SubmitSweepAsync(LimitCluster.Sweep(LimitCluster.Padded(Cubic, 2000), [2]));
        await LimitCluster.Refused(StatusCode.InvalidArgument, () => _client.SubmitSweepAsync(LimitCluster.Sweep(LimitCluster.Padded(Cubic, 2001), [2])).ResponseAsync,
            "family_json: 2001 bytes exceeds the limit max-family-bytes = 2000");
    }

    [Fact]
    public async Task Unknowns_parameters_degree_and_expression_nodes_at_the_limit_pass_and_one_more_is_refused()
    {
        // At every limit at once: 2 unknowns, 1 parameter, degree 3, 4 nodes per equation, Bézout number 3.
        await _client.SubmitSweepAsync(LimitCluster.Sweep(TestFamilies.Json("edge", ["x", "y"], ["x^3 - P", "y - x"], OneParameter), [2]));

        (string Json, string[] Parts)[] over =
        [
            (TestFamilies.Json("three", ["x", "y", "z"], ["x - P", "y - 1", "z - 1"], OneParameter), ["3 unknowns, above the limit of 2", "max-unknowns = 2"]),
            (TestFamilies.Json("two", ["x"], ["x - P - Q"], [("P", -1, 1), ("Q", -1, 1)]), ["2 parameters, above the limit of 1", "max-parameters = 1"]),
            (TestFamilies.Json("quartic", ["x"], ["x^4 - P"], OneParameter), ["4", "max-degree = 3"]),
            (TestFamilies.Json("five", ["x"], ["-x^3 + P"], OneParameter), ["more than 4 expression nodes", "max-expression-nodes = 4"]),
        ];
        foreach (var (json, parts) in over)
        {
            await LimitCluster.Refused(StatusCode.InvalidArgument, () => _client.SubmitSweepAsync(LimitCluster.Sweep(json, [2])).ResponseAsync, ["family_json: ", .. parts]);
        }
    }

    [Fact]
    public async Task Asked_points_longer_than_a_family_may_be_are_refused_before_the_atlas_is_read()
    {
        // No atlas exists: a point of the allowed length gets as far as the lookup (NotFound), a longer one not.
        var ask = new AskRequest { AtlasId = "a0123456789abcde", Point = { 0.5 } };
        await LimitCluster.Refused(StatusCode.NotFound, () => _client.AskAsync(ask).ResponseAsync, "a0123456789abcde");

        ask.Point.Add(0.25);
        await LimitCluster.Refused(StatusCode.InvalidArgument, () => _client.AskAsync(ask).ResponseAsync, "point: 2 values exceeds the limit max-parameters = 1");
    }
}
