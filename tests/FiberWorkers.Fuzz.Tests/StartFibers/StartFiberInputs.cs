using System.Numerics;
using FiberWorkers.Fuzz.Tests.Families;
using FiberWorkers.Fuzz.Tests.Mutation;
using FiberWorkers.Solving.Randomness;
using FiberWorkers.Solving.StartFibers;

namespace FiberWorkers.Fuzz.Tests.StartFibers;

/// <summary>Start-fiber fuzz inputs: valid files written by <see cref="StartFiberFile.Serialize"/>, then mutated.</summary>
internal static class StartFiberInputs
{
    private static readonly Lazy<(byte[] Bytes, JsonTree Tree)[]> Seeds = new(() =>
        [.. ValidFibers().Select(f => StartFiberFile.Serialize(f)).Select(b => (b, JsonTree.TryParse(b)!))]);

    /// <summary>Valid start fibers with ordinary and extreme values (±0, the largest and smallest doubles, empty fibers).</summary>
    public static IEnumerable<StartFiber> ValidFibers()
    {
        var hash = new string('a', 64);
        yield return new StartFiber(
            hash,
            ["x"],
            [new Complex(0.3, -0.7), new Complex(1.25, 0.5)],
            [[new Complex(1, 0)], [new Complex(-0.5, 0.8660254037844386)], [new Complex(-0.5, -0.8660254037844386)]],
            new StartFiberProvenance("total-degree", 42, 3, "homotopy", "all 3 paths regular"));
        yield return new StartFiber(
            "0123456789abcdef",
            ["c", "s"],
            [new Complex(-0.0, 1e-300)],
            [[new Complex(double.MaxValue, double.Epsilon), new Complex(-0.0, 0.0)]],
            new StartFiberProvenance("monodromy", ulong.MaxValue, long.MaxValue, "trace-test", "é — ünïcode note ✓"));
        yield return new StartFiber(
            string.Empty, [], [], [], new StartFiberProvenance(string.Empty, 0, 0, string.Empty, string.Empty));
    }

    public static byte[] Mutant(SeededRandom random)
    {
        var seeds = Seeds.Value;
        var (bytes, tree) = random.Pick(seeds);
        var donor = random.Pick(seeds).Bytes;
        if (random.Chance(0.6))
        {
            var mutated = tree.Clone();
            for (var k = random.Between(1, 3); k > 0; k--)
            {
                mutated = JsonMutator.Mutate(mutated, random, [.. seeds.Select(s => s.Tree)]);
            }

            bytes = FamilyInputs.Capped(mutated.Write(random), bytes);
            return random.Chance(0.25) ? FamilyInputs.Capped(ByteMutator.Mutate(bytes, random, donor), bytes) : bytes;
        }

        for (var k = random.Between(1, 4); k > 0; k--)
        {
            bytes = FamilyInputs.Capped(ByteMutator.Mutate(bytes, random, donor), bytes);
        }

        return bytes;
    }
}
