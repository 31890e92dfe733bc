using System.Numerics;
using FiberWorkers.Cluster.Contracts;
using FiberWorkers.Contracts.V1;
using FiberWorkers.Testing;
using Grpc.Core;

namespace FiberWorkers.Cluster.Tests.Limits;

/// <summary>
/// The limit arithmetic at the far ends of what the contract allows, where 64-bit counts would overflow: exact
/// counts in the refusals, and refusal before anything is computed.
/// </summary>
public sealed class RequestChecksLimitTests
{
    [Fact]
    public void The_largest_settings_the_contract_allows_plan_an_exact_number_of_tiles_and_are_refused_with_it()
    {
        var settings = new SweepSettings { LinesPerTile = 10_000, DeltaFraction = 0.01, RefineDepth = 12 };
        settings.Divisions.Add(Enumerable.Repeat(4096, 64));
        RequestChecks.Settings(settings, "settings");

        // 4096^64 = 2^768 level-0 tiles; refinement adds 2^768 · Σ_{l=1..12} 2^(64·l).
        var levelZero = BigInteger.Pow(2, 768);
        var refined = Enumerable.Range(1, 12).Aggregate(BigInteger.Zero, (sum, l) => sum + (levelZero << (64 * l)));
        var plan = SweepPlan.Of(settings);
        Assert.Equal(levelZero, plan.LevelZero);
        Assert.Equal(refined, plan.Refined);
        Assert.Equal((levelZero + refined) * 10_000 * 2, plan.Samples);

        var error = Assert.Throws<RpcException>(() => RequestChecks.SweepShape(settings, RequestLimits.Default, "sweep"));
        Assert.Equal(StatusCode.InvalidArgument, error.StatusCode);
        Assert.StartsWith($"sweep: {levelZero + refined} tiles ({levelZero} at level 0", error.Status.Detail, StringComparison.Ordinal);
        Assert.EndsWith("exceeds the limit max-tiles-per-sweep = 10000", error.Status.Detail, StringComparison.Ordinal);
    }

    [Fact]
    public void A_Bezout_number_beyond_64_bits_is_refused_with_its_exact_value_before_any_solve()
    {
        // 40 unknowns (the default limit), each equation of degree 32 (the default limit): Bézout number 32^40 = 2^200.
        var unknowns = Enumerable.Range(1, 40).Select(i => $"x{i}").ToArray();
        var json = TestFamilies.Json("wide", unknowns, [.. unknowns.Select(u => $"{u}^32 - P")], [("P", -1, 1)]);
        var request = LimitCluster.Sweep(json, [2]);
        request.Settings.StartMethod = "total-degree";

        var error = Assert.Throws<RpcException>(() => RequestChecks.SubmitSweep(request, RequestLimits.Default));

        Assert.Equal(StatusCode.InvalidArgument, error.StatusCode);
        Assert.Equal(
            $"sweep: each solve of the family tracks {BigInteger.Pow(2, 200)} paths (the Bézout number; the start fiber is computed by total degree) exceeds the limit max-paths = 20000",
            error.Status.Detail);
    }

    [Fact]
    public void A_stated_root_count_is_the_path_count_of_a_monodromy_start_and_the_Bezout_number_bounds_it_otherwise()
    {
        // x²y = P, xy = 1: Bézout number 3·2 = 6, but one solution (x = P, y = 1/P for P ≠ 0), which the family states.
        var stated = TestFamilies.Json("stated", ["x", "y"], ["x^2*y - P", "x*y - 1"], [("P", 0.5, 1)], rootCount: 1);
        var unstated = TestFamilies.Json("unstated", ["x", "y"], ["x^2*y - P", "x*y - 1"], [("P", 0.5, 1)]);
        var limits = RequestLimits.Default with { MaxPaths = 5 };
        RequestChecks.SubmitSweep(Monodromy(stated), limits);

        var error = Assert.Throws<RpcException>(() => RequestChecks.SubmitSweep(Monodromy(unstated), limits));
        Assert.Contains("tracks 6 paths (the Bézout number bounds the root count, which the family does not state) exceeds the limit max-paths = 5", error.Status.Detail, StringComparison.Ordinal);
        Assert.Contains("tracks 6 paths (the Bézout number; the start fiber is computed by total degree)", Assert.Throws<RpcException>(() => RequestChecks.SubmitSweep(TotalDegree(stated), limits)).Status.Detail, StringComparison.Ordinal);
    }

    private static SubmitSweepRequest Monodromy(string json)
    {
        var request = LimitCluster.Sweep(json, [2]);
        request.Settings.StartMethod = "monodromy";
        return request;
    }

    private static SubmitSweepRequest TotalDegree(string json)
    {
        var request = LimitCluster.Sweep(json, [2]);
        request.Settings.StartMethod = "total-degree";
        return request;
    }
}
