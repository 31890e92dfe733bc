using System.Numerics;
using FiberWorkers.Algebra.Families;
using FiberWorkers.Solving.Fibers;
using FiberWorkers.Solving.StartFibers;
using FiberWorkers.Solving.Tests.References;
using FiberWorkers.Testing;

namespace FiberWorkers.Solving.Tests.StartFibers;

/// <summary>
/// The automatic choice between total degree and monodromy, and monodromy start fibers in the start-fiber file.
/// The rule: monodromy when the Bézout number exceeds 128, or when a known root count is at most a quarter of it
/// (and the Bézout number exceeds 32); total degree otherwise.
/// </summary>
public sealed class StartFiberFactoryTests : IDisposable
{
    private readonly string _directory = Directory.CreateTempSubdirectory("start-fiber-factory-tests-").FullName;

    public void Dispose() => Directory.Delete(_directory, recursive: true);

    public static TheoryData<string, int?, StartFiberMethod> Decisions => new()
    {
        // Bézout numbers: two-bus 2, Katsura-4 16, microgrid4 2⁶ = 64, Katsura-7 2⁷ = 128, microgrid5 2⁸ = 256,
        // cyclic-6 6! = 720.
        { "two-bus", null, StartFiberMethod.TotalDegree },
        { "two-bus", 1, StartFiberMethod.TotalDegree },
        { "katsura-4", 4, StartFiberMethod.TotalDegree },   // a quarter, but 16 paths are cheaper than any loop
        { "microgrid4", null, StartFiberMethod.TotalDegree },
        { "microgrid4", 14, StartFiberMethod.Monodromy },
        { "microgrid4", 16, StartFiberMethod.Monodromy },   // exactly a quarter
        { "microgrid4", 17, StartFiberMethod.TotalDegree },
        { "katsura-7", null, StartFiberMethod.TotalDegree }, // exactly the threshold
        { "katsura-7", 32, StartFiberMethod.Monodromy },
        { "katsura-7", 33, StartFiberMethod.TotalDegree },
        { "katsura-7", 128, StartFiberMethod.TotalDegree },
        { "microgrid5", null, StartFiberMethod.Monodromy },
        { "microgrid5", 250, StartFiberMethod.Monodromy },
        { "cyclic-6", null, StartFiberMethod.Monodromy },
    };

    [Theory]
    [MemberData(nameof(Decisions))]
    public void Choose_follows_the_documented_rule(string name, int? rootCountHint, StartFiberMethod expected)
    {
        var system = Family(name).System;

        var (method, reason) = StartFiberFactory.Choose(system, rootCountHint);

        Assert.Equal(expected, method);
        Assert.Contains($"Bézout number {system.BezoutNumber}", reason, StringComparison.Ordinal);
        if (rootCountHint is { } hint && method == StartFiberMethod.Monodromy && system.BezoutNumber <= StartFiberFactory.TotalDegreeThreshold)
        {
            Assert.Contains($"expected root count {hint} is at most a quarter", reason, StringComparison.Ordinal);
        }
    }

    [Fact]
    public void Choose_agrees_with_the_rule_on_every_bundled_example_and_every_hint()
    {
        foreach (var name in TestFamilies.ExampleNames)
        {
            var system = TestFamilies.Example(name).System;
            var bezout = (int)system.BezoutNumber;
            foreach (int? hint in new int?[] { null, 1, bezout / 4, (bezout / 4) + 1, bezout })
            {
                var expected = bezout > StartFiberFactory.TotalDegreeThreshold || (hint * 4 <= bezout && bezout > 32)
                    ? StartFiberMethod.Monodromy
                    : StartFiberMethod.TotalDegree;

                Assert.True(expected == StartFiberFactory.Choose(system, hint).Method, $"{name}, Bézout {bezout}, hint {hint?.ToString() ?? "none"}");
            }
        }
    }

    [Fact]
    public void Create_with_auto_names_its_decision_and_computes_by_the_method_chosen()
    {
        var small = TestFamilies.Example("two-bus");
        var large = TestFamilies.Example("microgrid5");
        var options = new SolveOptions { Seed = 9_101 };

        var bySmall = StartFiberFactory.Create(small.System, small.ContentHash, small.Parameters, StartFiberMethod.Auto, options);
        var byLarge = StartFiberFactory.Create(large.System, large.ContentHash, large.Parameters, StartFiberMethod.Auto, options);

        Assert.Equal("auto: Bézout number 2 is at most 128: total degree is cheap", bySmall.Decision);
        Assert.Equal("total-degree", bySmall.Fiber.Provenance.Method);
        Assert.Null(bySmall.Monodromy);
        // P = B·sin δ on one lossless line: 2 solutions (power-angle equation, e.g. Grainger & Stevenson).
        Assert.Equal(2, bySmall.Fiber.RootCount);

        Assert.StartsWith("auto: Bézout number 256 above 128", byLarge.Decision, StringComparison.Ordinal);
        Assert.Equal("monodromy", byLarge.Fiber.Provenance.Method);
        Assert.NotNull(byLarge.Monodromy);
        // At most C(8, 4) = 70 (Baillieul & Byrnes 1982, from memory); the bundled lines are unequal and reach it.
        Assert.Equal(70, byLarge.Fiber.RootCount);
    }

    [Fact]
    public void Create_passes_the_root_count_hint_to_monodromy_as_its_expected_count()
    {
        // Four buses with equal lines: 14 (Gröbner-basis computation, REFERENCES.md).
        var family = TestFamilies.Example("microgrid4");

        var result = StartFiberFactory.Create(
            family.System, family.ContentHash, family.Parameters, StartFiberMethod.Monodromy, new SolveOptions { Seed = 9_201 }, rootCountHint: 14);

        Assert.Equal("monodromy (asked for)", result.Decision);
        Assert.Equal(14, result.Fiber.RootCount);
        Assert.Equal("expected-count", result.Fiber.Provenance.Completeness);
    }

    [Theory]
    [InlineData("two-link-arm", new[] { 1.1, 0.4 }, 2)]
    [InlineData("microgrid4", new[] { 0.3, -0.45, 0.2 }, -1)]
    public void A_monodromy_start_fiber_saves_loads_and_gives_the_same_parameter_homotopy_result(string example, double[] target, int realCount)
    {
        var family = TestFamilies.Example(example);
        var options = new SolveOptions { Seed = 9_301 };
        var solver = new FiberSolver(family.System, options);
        var fiber = StartFiberFactory.Create(family.System, family.ContentHash, family.Parameters, StartFiberMethod.Monodromy, options).Fiber;
        var path = Path.Combine(_directory, $"{example}.start.json");
        Complex[] point = [.. target.Select(v => new Complex(v, 0))];

        StartFiberFile.Save(fiber, path);
        var loaded = StartFiberFile.Load(path, family.ContentHash);

        Assert.Equal(fiber.Provenance, loaded.Provenance);
        Assert.Equal("monodromy", loaded.Provenance.Method);
        Assert.Equal(fiber.Parameters, loaded.Parameters);
        Assert.Equal(fiber.RootCount, loaded.RootCount);
        for (var i = 0; i < fiber.RootCount; i++)
        {
            Assert.Equal(fiber.Solutions[i], loaded.Solutions[i]);
        }

        var fromOriginal = solver.Solve(fiber, point);
        var fromLoaded = solver.Solve(loaded, point);
        Assert.Equal(fromOriginal.RootCount, fromLoaded.RootCount);
        for (var i = 0; i < fromOriginal.RootCount; i++)
        {
            Assert.Equal(fromOriginal.Solutions[i].Values, fromLoaded.Solutions[i].Values);
        }

        // The same fiber as a total-degree solve at the real point finds, with the same real count.
        var totalDegree = solver.SolveTotalDegree(point);
        SolutionSets.AssertSame([.. totalDegree.Solutions.Select(s => s.Values)], [.. fromLoaded.Solutions.Select(s => s.Values)], 1e-8, example);
        Assert.Equal(totalDegree.RealCount, fromLoaded.RealCount);
        Assert.True(fromLoaded.RealCountCertified);
        if (realCount >= 0)
        {
            // Two-link arm with L₁ = 1, L₂ = 0.6 and the target at r = |(1.1, 0.4)| ≈ 1.17: two real solutions since
            // |L₁ − L₂| < r < L₁ + L₂ (standard robot kinematics, e.g. Craig, Introduction to Robotics).
            Assert.Equal(realCount, fromLoaded.RealCount);
        }
    }

    private static FamilyDefinition Family(string name) => name switch
    {
        "katsura-4" => TestFamilies.Katsura(4),
        "katsura-7" => TestFamilies.Katsura(7),
        "cyclic-6" => TestFamilies.Cyclic(6),
        _ => TestFamilies.Example(name),
    };
}
