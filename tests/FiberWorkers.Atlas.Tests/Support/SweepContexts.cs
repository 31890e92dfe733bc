using System.Collections.Concurrent;
using FiberWorkers.Algebra.Families;
using FiberWorkers.Atlas.Sweeps;
using FiberWorkers.Testing;

namespace FiberWorkers.Atlas.Tests.Support;

/// <summary>
/// Sweep contexts shared by the tests of one run: start fibers are the expensive part of a context and a pure
/// function of (family, options), so each (family, options) pair is computed once.
/// </summary>
internal static class SweepContexts
{
    private static readonly ConcurrentDictionary<string, Lazy<SweepContext>> Cache = new(StringComparer.Ordinal);

    public static SweepContext For(FamilyDefinition family, SweepOptions options) =>
        Cache.GetOrAdd(
            $"{family.ContentHash}|{options.CanonicalText}",
            _ => new Lazy<SweepContext>(() => SweepContext.Create(family, options with { MaxDegreeOfParallelism = 1 }))).Value;

    public static SweepContext Example(string name, SweepOptions options) => For(TestFamilies.Example(name), options);
}
