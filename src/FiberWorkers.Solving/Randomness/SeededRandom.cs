using System.Numerics;

namespace FiberWorkers.Solving.Randomness;

/// <summary>
/// A small deterministic generator (SplitMix64, Steele, Lea &amp; Flood 2014) whose sequence is fixed by this code,
/// not by a runtime version: the same seed gives the same numbers on every machine, which atlas content
/// hashes rely on. Not thread-safe; derive one per task with <see cref="Derive(ulong, ulong)"/>.
/// </summary>
public sealed class SeededRandom
{
    private ulong _state;

    /// <summary>Starts the sequence of <paramref name="seed"/>.</summary>
    public SeededRandom(ulong seed) => _state = seed;

    /// <summary>The next 64 random bits.</summary>
    public ulong NextUInt64()
    {
        _state += 0x9E3779B97F4A7C15UL;
        return Mix(_state);
    }

    /// <summary>Uniform in [0, 1) with 53 random bits.</summary>
    public double NextDouble() => (NextUInt64() >> 11) * (1.0 / (1UL << 53));

    /// <summary>Uniform in [low, high).</summary>
    public double NextDouble(double low, double high) => low + ((high - low) * NextDouble());

    /// <summary>Uniform integer in [0, count).</summary>
    public int NextInt(int count)
    {
        ArgumentOutOfRangeException.ThrowIfNegativeOrZero(count);
        return (int)(NextUInt64() % (ulong)count);
    }

    /// <summary>Standard normal (Box–Muller).</summary>
    public double NextGaussian()
    {
        var u = 1.0 - NextDouble();
        var v = NextDouble();
        return Math.Sqrt(-2 * Math.Log(u)) * Math.Cos(2 * Math.PI * v);
    }

    /// <summary>A complex number of modulus one with a uniform phase.</summary>
    public Complex NextUnitComplex() => Complex.FromPolarCoordinates(1, 2 * Math.PI * NextDouble());

    /// <summary>A complex number with independent standard normal real and imaginary parts.</summary>
    public Complex NextComplexGaussian() => new(NextGaussian(), NextGaussian());

    /// <summary>A seed derived from a parent seed and a key (a stream number, a tile index, ...).</summary>
    public static ulong Derive(ulong seed, ulong key) => Mix(Mix(seed ^ 0xD1B54A32D192ED03UL) + key);

    /// <summary>A seed derived from a parent seed and a text key.</summary>
    public static ulong Derive(ulong seed, string key)
    {
        ArgumentNullException.ThrowIfNull(key);
        var hash = 0xCBF29CE484222325UL;
        foreach (var c in key)
        {
            hash = (hash ^ c) * 0x100000001B3UL;
        }

        return Derive(seed, hash);
    }

    private static ulong Mix(ulong z)
    {
        z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9UL;
        z = (z ^ (z >> 27)) * 0x94D049BB133111EBUL;
        return z ^ (z >> 31);
    }
}
