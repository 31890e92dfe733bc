using FiberWorkers.Solving.Randomness;

namespace FiberWorkers.Fuzz.Tests.Mutation;

/// <summary>Small helpers for drawing from a <see cref="SeededRandom"/>.</summary>
internal static class RandomChoice
{
    public static T Pick<T>(this SeededRandom random, IReadOnlyList<T> items) => items[random.NextInt(items.Count)];

    public static bool Chance(this SeededRandom random, double probability) => random.NextDouble() < probability;

    /// <summary>Uniform in [low, high].</summary>
    public static int Between(this SeededRandom random, int low, int high) => low + random.NextInt(high - low + 1);

    /// <summary>A length skewed towards small values (most mutations are small, a few are huge).</summary>
    public static int SkewedLength(this SeededRandom random, int max)
    {
        var bits = random.NextInt(BitLength(max) + 1);
        return Math.Min(max, random.NextInt(1 << Math.Min(bits, 30)) + 1);
    }

    private static int BitLength(int value) => 32 - int.LeadingZeroCount(value);
}
