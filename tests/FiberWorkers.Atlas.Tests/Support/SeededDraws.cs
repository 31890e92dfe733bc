using CsCheck;

namespace FiberWorkers.Atlas.Tests.Support;

/// <summary>
/// Deterministic samples of a CsCheck generator from a seed of our own, so property checks run the same cases on
/// every machine and every run (CsCheck's generators still supply their edge-biased values).
/// </summary>
internal static class SeededDraws
{
    public static IReadOnlyList<T> Take<T>(Gen<T> gen, ulong seed, int count)
    {
        var random = new PCG(1, seed);
        var values = new T[count];
        for (var i = 0; i < count; i++)
        {
            values[i] = gen.Generate(random, null!, out _);
        }

        return values;
    }
}
