using System.CommandLine;
using System.Diagnostics;
using System.Numerics;
using FiberWorkers.Atlas.Learning;
using FiberWorkers.Atlas.Stores;
using FiberWorkers.Atlas.Sweeps;
using FiberWorkers.Cli.Examples;
using FiberWorkers.Cli.Output;
using FiberWorkers.Contracts.V1;
using FiberWorkers.Solving.Fibers;

namespace FiberWorkers.Cli.Commands;

/// <summary>
/// <c>fiber bench sweep</c>: a whole sweep of a bundled family into a scratch atlas with a sample budget — wall time,
/// start-fiber time, labeled samples per second in all and by kind — then, on samples of that atlas, the cost of one
/// near-boundary sample (real-only tracking from its interval's midpoint) against one solved midpoint (a full solve
/// from the start fiber).
/// </summary>
internal static class SweepBenchmark
{
    private sealed class StageClock : IProgress<SweepProgress>
    {
        private readonly Stopwatch _clock = Stopwatch.StartNew();

        public TimeSpan? TilesStarted { get; private set; }

        public void Report(SweepProgress value)
        {
            if (TilesStarted is null && value.Stage.StartsWith("level", StringComparison.Ordinal))
            {
                TilesStarted = _clock.Elapsed;
            }
        }
    }

    public static Command Create(TextWriter output)
    {
        var example = new Option<string>("--example") { Description = "The bundled family.", DefaultValueFactory = _ => "microgrid4" };
        var budget = new Option<long>("--budget") { Description = "Sample budget of the sweep (it picks the tiles).", DefaultValueFactory = _ => 100_000 };
        var lines = new Option<int?>("--lines") { Description = "Lines per tile; the tiles then follow from the budget (default: 4 tiles per axis, lines from the budget)." };
        var threads = new Option<int>("--threads") { Description = "Tiles computed at once (default: all cores).", DefaultValueFactory = _ => Environment.ProcessorCount };
        var costSamples = new Option<int>("--cost-samples") { Description = "Near-boundary samples (and as many midpoints) timed one by one for the cost ratio.", DefaultValueFactory = _ => 400 };
        var command = new Command("sweep", "A whole sweep with a sample budget: samples per second by kind; cost of a near-boundary sample vs a solved midpoint.");
        foreach (var option in new Option[] { example, budget, lines, threads, costSamples })
        {
            command.Options.Add(option);
        }

        command.SetAction(parse =>
        {
            var name = parse.GetValue(example)!;
            if (!ExampleCatalog.Names.Contains(name))
            {
                throw new UsageException($"--example: no bundled example '{name}' (see 'fiber examples')");
            }

            var samplesBudget = parse.GetValue(budget) is >= 100 and <= 100_000_000 ? parse.GetValue(budget) : throw new UsageException("--budget must be between 100 and 100000000");
            var givenLines = parse.GetValue(lines) is not { } l ? (int?)null : l is >= 1 and <= 10_000 ? l : throw new UsageException("--lines must be between 1 and 10000");
            var threadCount = parse.GetValue(threads) is >= 1 and <= 4096 ? parse.GetValue(threads) : throw new UsageException("--threads must be between 1 and 4096");
            var timed = parse.GetValue(costSamples) is >= 1 and <= 100_000 ? parse.GetValue(costSamples) : throw new UsageException("--cost-samples must be between 1 and 100000");

            var family = ExampleCatalog.Load(name);
            var (divisions, lineCount) = SweepCommand.Layout("auto", family.Parameters.Count, givenLines, samplesBudget);
            var options = new SweepOptions
            {
                Divisions = divisions,
                LinesPerTile = lineCount,
                MaxDegreeOfParallelism = threadCount,
                SampleBudget = samplesBudget,
            };
            var path = Path.Combine(Path.GetTempPath(), $"fiber-bench-sweep-{Environment.ProcessId}.db");
            try
            {
                SweepSummary summary;
                var clock = new StageClock();
                var wall = Stopwatch.StartNew();
                using (var store = SqliteAtlasStore.Open(path, create: true))
                {
                    summary = new SweepRunner(store).Run(family, options, clock);
                }

                var wallSeconds = wall.Elapsed.TotalSeconds;
                var startSeconds = clock.TilesStarted?.TotalSeconds ?? 0;
                var (nearMicroseconds, midpointMicroseconds, pairs) = Costs(family, path, timed);
                var tileSeconds = wallSeconds - startSeconds;
                JsonOutput.Write(output, writer =>
                {
                    writer.WriteStartObject();
                    MachineDescription.Write(writer);
                    writer.WriteString("family", name);
                    writer.WriteNumber("threads", threadCount);
                    writer.WriteNumber("budget", samplesBudget);
                    writer.WriteString("tiles", string.Join('x', options.Divisions));
                    writer.WriteNumber("linesPerTile", lineCount);
                    writer.WriteNumber("samples", summary.Samples);
                    writer.WriteNumber("crossings", summary.Crossings);
                    writer.WriteNumber("wallSeconds", Math.Round(wallSeconds, 2));
                    writer.WriteNumber("startFiberSeconds", Math.Round(startSeconds, 2));
                    writer.WriteNumber("samplesPerSecond", Math.Round(summary.Samples / wallSeconds, 1));
                    writer.WriteNumber("samplesPerSecondAfterStartFibers", Math.Round(summary.Samples / tileSeconds, 1));
                    writer.WriteStartObject("samplesPerSecondByKind");
                    foreach (var (kind, count) in summary.Kinds.OrderBy(k => k.Key, StringComparer.Ordinal))
                    {
                        writer.WriteNumber(kind, Math.Round(count / wallSeconds, 1));
                    }

                    writer.WriteEndObject();
                    writer.WriteStartObject("kinds");
                    foreach (var (kind, count) in summary.Kinds.OrderBy(k => k.Key, StringComparer.Ordinal))
                    {
                        writer.WriteNumber(kind, count);
                    }

                    writer.WriteEndObject();
                    writer.WriteNumber("timedPairs", pairs);
                    writer.WriteNumber("nearBoundaryMicroseconds", Math.Round(nearMicroseconds, 1));
                    writer.WriteNumber("midpointMicroseconds", Math.Round(midpointMicroseconds, 1));
                    writer.WriteNumber("nearBoundaryToMidpointCost", Math.Round(nearMicroseconds / midpointMicroseconds, 3));
                    writer.WriteString("contentHash", summary.ContentHash);
                    writer.WriteEndObject();
                });
                return CommandLine.Success;
            }
            finally
            {
                foreach (var file in new[] { path, path + "-wal", path + "-shm" })
                {
                    File.Delete(file);
                }
            }
        });
        return command;
    }

    /// <summary>
    /// Mean cost of one near-boundary sample (tracking the real solutions of its line's nearest midpoint of the same
    /// label to it) and of one midpoint (a full solve from the start fiber), in µs on one thread, after a warm-up round.
    /// </summary>
    private static (double Near, double Midpoint, int Pairs) Costs(Algebra.Families.FamilyDefinition family, string path, int count)
    {
        using var store = SqliteAtlasStore.Open(path, create: false);
        var samples = SampleSet.From(AtlasSnapshot.Load(store, path));
        var solver = new FiberSolver(family.System, SolveOptions.Default with { MaxDegreeOfParallelism = 1 });
        var start = solver.CreateStartFiber(family.ContentHash, family.Parameters);
        var byLine = Enumerable.Range(0, samples.Count).GroupBy(i => (samples.Tiles[i], samples.Samples[i].Line)).ToArray();
        var pairs = new List<(Sample Near, Sample Midpoint)>();
        foreach (var line in byLine)
        {
            var midpoints = line.Where(i => samples.Samples[i].Kind == SampleKind.Midpoint).Select(i => samples.Samples[i]).ToArray();
            foreach (var candidate in line.Where(i => samples.Samples[i].Kind == SampleKind.NearBoundary).Select(i => samples.Samples[i]))
            {
                var source = midpoints.Where(m => m.Label == candidate.Label).MinBy(m => Math.Abs(m.S - candidate.S));
                if (source is not null && pairs.Count < count)
                {
                    pairs.Add((candidate, source));
                }
            }
        }

        if (pairs.Count == 0)
        {
            return (double.NaN, double.NaN, 0);
        }

        var n = family.Unknowns.Count;
        double near = 0, midpoint = 0;
        for (var round = 0; round < 2; round++)
        {
            var clock = new Stopwatch();
            near = 0;
            midpoint = 0;
            foreach (var (nearSample, source) in pairs)
            {
                var from = source.Point.Select(v => new Complex(v, 0)).ToArray();
                var to = nearSample.Point.Select(v => new Complex(v, 0)).ToArray();
                var real = Enumerable.Range(0, source.Label).Select(r => Enumerable.Range(0, n).Select(k => new Complex(source.Solutions[(r * n) + k], 0)).ToArray()).ToArray();
                clock.Restart();
                solver.Solve(start, from);
                midpoint += clock.Elapsed.TotalMicroseconds;
                clock.Restart();
                solver.TrackSegment(from, to, real);
                near += clock.Elapsed.TotalMicroseconds;
            }
        }

        return (near / pairs.Count, midpoint / pairs.Count, pairs.Count);
    }
}
