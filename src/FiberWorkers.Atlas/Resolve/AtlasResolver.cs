using System.Globalization;
using FiberWorkers.Atlas.Learning;
using FiberWorkers.Atlas.Stores;
using FiberWorkers.Atlas.Sweeps;
using FiberWorkers.Contracts.V1;
using FiberWorkers.Solving.Fibers;
using FiberWorkers.Solving.StartFibers;
using Google.Protobuf;

namespace FiberWorkers.Atlas.Resolve;

/// <summary>Builds resolvers from atlas files and writes what they learn back as new versions.</summary>
public static class AtlasResolver
{
    /// <summary>
    /// A resolver for a snapshot: the family's start fiber comes from the atlas (kept by the sweep that made the
    /// version); a single-threaded solver, since queries are the unit of parallelism.
    /// </summary>
    public static Resolver Create(IAtlasStore store, AtlasSnapshot snapshot, RegionClassifier? classifier = null, ResolveOptions? options = null, SolveOptions? solve = null)
    {
        ArgumentNullException.ThrowIfNull(store);
        ArgumentNullException.ThrowIfNull(snapshot);
        var settings = (solve ?? SolveOptions.Default) with { MaxDegreeOfParallelism = 1 };
        var solver = new FiberSolver(snapshot.Family.System, settings);
        return new Resolver(snapshot, solver, StartFiber(store, snapshot, settings), classifier, options);
    }

    /// <summary>The family's start fiber stored with the sweep behind <paramref name="snapshot"/>, computed when absent.</summary>
    public static StartFiber StartFiber(IAtlasStore store, AtlasSnapshot snapshot, SolveOptions solve)
    {
        ArgumentNullException.ThrowIfNull(store);
        ArgumentNullException.ThrowIfNull(snapshot);
        var sweep = store.Versions(snapshot.AtlasId).LastOrDefault(v => v.Kind == "sweep" && v.Version <= snapshot.Version.Version)
            ?? store.Versions(snapshot.AtlasId).First(v => v.Kind == "sweep");
        var (seed, method) = ParseOptions(sweep.Options);
        var options = new SweepOptions { Divisions = [.. snapshot.Family.Parameters.Select(_ => 1)], Seed = seed, StartMethod = method };
        var bytes = store.GetBlob(SweepRunner.StartFiberKey(snapshot.Family, options, "family"));
        if (bytes is not null)
        {
            return StartFiberFile.Deserialize(bytes, "the atlas's start fiber", snapshot.Family.ContentHash);
        }

        return StartFiberFactory.Create(snapshot.Family.System, snapshot.Family.ContentHash, snapshot.Family.Parameters, method, solve with { Seed = (int)(seed % int.MaxValue) }).Fiber;
    }

    /// <summary>
    /// Appends points answered by full solves as new samples (kind resolved) in a new atlas version (kind learned),
    /// so later queries nearby take the fast path. Returns the version, or null when there was nothing to add.
    /// </summary>
    public static int? Learn(IAtlasStore store, AtlasSnapshot snapshot, IReadOnlyList<(double[] Point, ResolveAnswer Answer)> answers)
    {
        ArgumentNullException.ThrowIfNull(store);
        ArgumentNullException.ThrowIfNull(snapshot);
        ArgumentNullException.ThrowIfNull(answers);
        var learned = answers.Where(a => a.Answer.Method == "full" && !a.Answer.OutsideBox && a.Answer.Certified).ToArray();
        if (learned.Length == 0)
        {
            return null;
        }

        var n = snapshot.Family.Unknowns.Count;
        var next = store.Versions(snapshot.AtlasId).Max(v => v.Version) + 1;
        var tile = new TileResult { FamilyHash = snapshot.Family.ContentHash, TileKey = string.Create(CultureInfo.InvariantCulture, $"learned:v{next}") };
        tile.Low.Add(snapshot.Family.Parameters.Select(p => p.Low));
        tile.High.Add(snapshot.Family.Parameters.Select(p => p.High));
        for (var i = 0; i < learned.Length; i++)
        {
            var (point, answer) = learned[i];
            var sample = new Sample { Label = answer.RealCount, Kind = SampleKind.Resolved, Line = i, Certified = answer.Certified };
            sample.Point.Add(point);
            foreach (var solution in answer.Solutions)
            {
                for (var u = 0; u < n; u++)
                {
                    sample.Solutions.Add(solution.Values[u].Real);
                }
            }

            tile.Samples.Add(sample);
        }

        var payload = tile.ToByteArray();
        var hash = SqliteAtlasStore.HashOf(payload);
        return store.CommitDerived(
            snapshot.AtlasId,
            snapshot.Version.Version,
            "learned",
            string.Create(CultureInfo.InvariantCulture, $"learned:{learned.Length} resolved samples"),
            [(tile.TileKey, hash, payload)],
            null,
            tiles =>
            {
                var contents = tiles.Values.Select(h => TileResult.Parser.ParseFrom(store.Tile(h).Payload)).ToArray();
                var (samples, crossings, labels, kinds, flags) = AtlasContent.Count(contents);
                return (AtlasContent.Hash(snapshot.Family.ContentHash, snapshot.Version.Options, tiles), AtlasContent.SummaryJson(tiles.Count, samples, crossings, labels, kinds, flags));
            });
    }

    private static (ulong Seed, StartFiberMethod Method) ParseOptions(string options)
    {
        var seed = 1UL;
        var method = StartFiberMethod.Auto;
        foreach (var part in options.Split(';'))
        {
            if (part.StartsWith("seed=", StringComparison.Ordinal) && ulong.TryParse(part.AsSpan(5), NumberStyles.None, CultureInfo.InvariantCulture, out var s))
            {
                seed = s;
            }
            else if (part.StartsWith("start=", StringComparison.Ordinal) && Enum.TryParse<StartFiberMethod>(part[6..], out var m))
            {
                method = m;
            }
        }

        return (seed, method);
    }
}
