using System.CommandLine;
using System.Diagnostics;
using System.Numerics;
using System.Text.Json;
using FiberWorkers.Algebra.Families;
using FiberWorkers.Atlas.Sweeps;
using FiberWorkers.Cli.Examples;
using FiberWorkers.Cli.Output;
using FiberWorkers.Solving.Fibers;
using FiberWorkers.Solving.Randomness;

namespace FiberWorkers.Cli.Commands;

/// <summary><c>fiber bench ...</c>: measurements that print JSON (the figures in the README come from these).</summary>
internal static class BenchCommand
{
    public static Command Create(TextWriter output)
    {
        var command = new Command("bench", "Measure solver throughput; prints JSON.");
        command.Subcommands.Add(CreateSolve(output));
        command.Subcommands.Add(MonodromyBenchmark.Create(output));
        command.Subcommands.Add(SweepBenchmark.Create(output));
        command.Subcommands.Add(CreateResolve(output));
        command.Subcommands.Add(CreateCluster(output));
        command.Subcommands.Add(CreateAsk(output));
        return command;
    }

    private static Command CreateCluster(TextWriter output)
    {
        var example = new Option<string>("--example") { Description = "The bundled family to sweep.", DefaultValueFactory = _ => "reaction-switch" };
        var tiles = new Option<string>("--tiles") { Description = "Tiles per axis.", DefaultValueFactory = _ => "8x8" };
        var lines = new Option<int>("--lines") { Description = "Lines per tile.", DefaultValueFactory = _ => 30 };
        var costTiles = new Option<int>("--cost-tiles") { Description = "Tiles per axis of the cubic sweep replayed to time the coordinator alone.", DefaultValueFactory = _ => 40 };
        var command = new Command("cluster", "Tile-phase time of a sweep embedded, with 1 and with 2 local worker processes; the coordinator's cost per tile.");
        foreach (var option in new Option[] { example, tiles, lines, costTiles })
        {
            command.Options.Add(option);
        }

        command.SetAction(async (parse, cancellation) =>
        {
            var family = ExampleCatalog.Load(parse.GetValue(example)!);
            var options = new SweepOptions
            {
                Divisions = SweepCommand.Divisions(parse.GetValue(tiles)!, family.Parameters.Count, parse.GetValue(lines), null),
                LinesPerTile = parse.GetValue(lines) is >= 1 and <= 10_000 ? parse.GetValue(lines) : throw new UsageException("--lines must be between 1 and 10000"),
            };
            var times = await ClusterBenchmark.SweepAsync(family, options, cancellation).ConfigureAwait(false);
            var per = parse.GetValue(costTiles) is >= 2 and <= 400 ? parse.GetValue(costTiles) : throw new UsageException("--cost-tiles must be between 2 and 400");
            var cubic = ExampleCatalog.Load("cubic");
            var cost = await ClusterBenchmark.CoordinatorCostAsync(cubic, new SweepOptions { Divisions = [per, per], LinesPerTile = 1 }, cancellation).ConfigureAwait(false);
            JsonOutput.Write(output, writer =>
            {
                writer.WriteStartObject();
                MachineDescription.Write(writer);
                writer.WriteString("family", family.Name);
                writer.WriteString("options", options.CanonicalText);
                writer.WriteNumber("tiles", times.Tiles);
                writer.WriteNumber("runs", times.Runs);
                writer.WriteNumber("warmupSeconds", ClusterBenchmark.WarmupTime.TotalSeconds);
                writer.WriteNumber("embeddedSeconds", Math.Round(times.Embedded, 3));
                writer.WriteNumber("embeddedOneThreadSeconds", Math.Round(times.EmbeddedOneThread, 3));
                writer.WriteNumber("oneWorkerSeconds", Math.Round(times.OneWorker, 3));
                writer.WriteNumber("twoWorkersSeconds", Math.Round(times.TwoWorkers, 3));
                writer.WriteNumber("twoOverOne", Math.Round(times.OneWorker / times.TwoWorkers, 3));
                writer.WriteNumber("embeddedTwoThreadsOverOne", Math.Round(times.EmbeddedOneThread / times.Embedded, 3));
                writer.WriteNumber("clusterOverhead", Math.Round((times.TwoWorkers / times.Embedded) - 1, 3));
                writer.WriteBoolean("sameContentHash", times.SameContent);
                writer.WriteNumber("twoOverOneMedian", Math.Round(Median(times.Rounds.Select(r => r.TwoOverOne)), 3));
                writer.WriteNumber("clusterOverheadMedian", Math.Round(Median(times.Rounds.Select(r => r.ClusterOverhead)), 3));
                writer.WriteStartArray("rounds");
                foreach (var round in times.Rounds)
                {
                    writer.WriteStartObject();
                    writer.WriteNumber("seed", round.Seed);
                    writer.WriteNumber("embeddedSeconds", Math.Round(round.Embedded, 3));
                    writer.WriteNumber("embeddedOneThreadSeconds", Math.Round(round.EmbeddedOneThread, 3));
                    writer.WriteNumber("oneWorkerSeconds", Math.Round(round.OneWorker, 3));
                    writer.WriteNumber("twoWorkersSeconds", Math.Round(round.TwoWorkers, 3));
                    writer.WriteNumber("twoOverOne", Math.Round(round.TwoOverOne, 3));
                    writer.WriteNumber("clusterOverhead", Math.Round(round.ClusterOverhead, 3));
                    writer.WriteEndObject();
                }

                writer.WriteEndArray();
                writer.WriteStartObject("coordinator");
                writer.WriteNumber("tiles", cost.Tiles);
                writer.WriteNumber("microsecondsPerTile", Math.Round(cost.MicrosecondsPerTile, 1));
                writer.WriteNumber("cpuMicrosecondsPerTile", Math.Round(cost.CpuMicrosecondsPerTile, 1));
                writer.WriteNumber("workersFedAtOneSecondPerTile", Math.Floor(1e6 / cost.MicrosecondsPerTile));
                writer.WriteEndObject();
                writer.WriteEndObject();
            });
            return CommandLine.Success;
        });
        return command;
    }

    /// <summary>The middle value (the mean of the two middle ones for an even count).</summary>
    private static double Median(IEnumerable<double> values)
    {
        var sorted = values.Order().ToArray();
        return sorted.Length == 0 ? double.NaN : 0.5 * (sorted[(sorted.Length - 1) / 2] + sorted[sorted.Length / 2]);
    }

    private static Command CreateAsk(TextWriter output)
    {
        var coordinator = new Option<string>("--coordinator") { Description = "The coordinator's address.", Required = true };
        var atlas = new Option<string>("--atlas") { Description = "The atlas id.", Required = true };
        var clients = new Option<int>("--clients") { Description = "Concurrent clients.", DefaultValueFactory = _ => 16 };
        var seconds = new Option<double>("--seconds") { Description = "How long to ask.", DefaultValueFactory = _ => 20 };
        var seed = new Option<long>("--seed") { Description = "Seed of the points.", DefaultValueFactory = _ => 7 };
        var command = new Command("ask", "Routed asks through a running coordinator from concurrent clients: throughput and p50/p99 latency.");
        var security = new ClientSecurityArguments();
        foreach (var option in (Option[])[coordinator, atlas, clients, seconds, seed, .. security.Options])
        {
            command.Options.Add(option);
        }

        command.SetAction(async (parse, cancellation) =>
        {
            var count = parse.GetValue(clients) is >= 1 and <= 10_000 ? parse.GetValue(clients) : throw new UsageException("--clients must be between 1 and 10000");
            var duration = parse.GetValue(seconds) is >= 1 and <= 3600 ? parse.GetValue(seconds) : throw new UsageException("--seconds must be between 1 and 3600");
            var url = ServeCommand.Url(parse.GetValue(coordinator)!, "--coordinator");
            var load = await ClusterBenchmark.AskAsync(
                url, security.Resolve(parse, url, "--coordinator"), parse.GetValue(atlas)!, count, duration, (ulong)Math.Max(0, parse.GetValue(seed)), cancellation).ConfigureAwait(false);
            JsonOutput.Write(output, writer =>
            {
                writer.WriteStartObject();
                MachineDescription.Write(writer);
                writer.WriteNumber("clients", count);
                writer.WriteNumber("seconds", duration);
                writer.WriteNumber("answered", load.Answered);
                writer.WriteNumber("refused", load.Refused);
                writer.WriteNumber("failed", load.Failed);
                writer.WriteNumber("answersPerSecond", Math.Round(load.PerSecond, 1));
                writer.WriteNumber("p50Microseconds", Math.Round(load.P50Microseconds, 1));
                writer.WriteNumber("p99Microseconds", Math.Round(load.P99Microseconds, 1));
                writer.WriteStartObject("methods");
                foreach (var (method, n) in load.Methods.OrderBy(m => m.Key, StringComparer.Ordinal))
                {
                    writer.WriteNumber(method, n);
                }

                writer.WriteEndObject();
                writer.WriteEndObject();
            });
            return CommandLine.Success;
        });
        return command;
    }

    private static Command CreateResolve(TextWriter output)
    {
        var atlas = new AtlasArguments();
        var count = new Option<int>("--points") { Description = "Random points to answer.", DefaultValueFactory = _ => 1000 };
        var seed = new Option<long>("--seed") { Description = "Seed of the points.", DefaultValueFactory = _ => 7 };
        var near = new Option<double>("--near-share") { Description = "Share of the points placed close to stored crossings.", DefaultValueFactory = _ => 0.3 };
        var json = new Option<bool>("--json") { Description = "Print JSON (the default output is JSON too; kept for symmetry)." };
        var command = new Command("resolve", "Answer random points of an atlas's box by real-only resolve and by full solve; compare time and answers.");
        atlas.AddTo(command);
        command.Options.Add(count);
        command.Options.Add(seed);
        command.Options.Add(near);
        command.Options.Add(json);
        command.SetAction(parse =>
        {
            var n = parse.GetValue(count) is >= 1 and <= 10_000_000 ? parse.GetValue(count) : throw new UsageException("--points must be between 1 and 10000000");
            var share = parse.GetValue(near) is >= 0 and <= 1 ? parse.GetValue(near) : throw new UsageException("--near-share must be in [0, 1]");
            using var store = atlas.Open(parse);
            var snapshot = atlas.Load(parse, store);
            var resolver = Atlas.Resolve.AtlasResolver.Create(store, snapshot);
            var report = ResolveBenchmark.Run(resolver, snapshot, n, share, (ulong)Math.Max(0, parse.GetValue(seed)));
            JsonOutput.Write(output, writer =>
            {
                writer.WriteStartObject();
                MachineDescription.Write(writer);
                writer.WriteString("family", snapshot.Family.Name);
                writer.WriteNumber("atlasVersion", snapshot.Version.Version);
                writer.WriteNumber("samples", snapshot.Samples.Count);
                writer.WriteNumber("rootCount", report.RootCount);
                writer.WriteNumber("points", report.Points);
                writer.WriteNumber("nearShare", share);
                writer.WriteNumber("resolveMeanUs", Math.Round(report.ResolveMean, 2));
                writer.WriteNumber("resolveP99Us", Math.Round(report.ResolveP99, 2));
                writer.WriteNumber("fullMeanUs", Math.Round(report.FullMean, 2));
                writer.WriteNumber("fullP99Us", Math.Round(report.FullP99, 2));
                writer.WriteNumber("speedup", Math.Round(report.FullMean / report.ResolveMean, 2));
                writer.WriteNumber("fallbackRate", report.FallbackRate);
                if (double.IsFinite(report.RealTrackMean))
                {
                    writer.WriteNumber("realTrackMeanUs", Math.Round(report.RealTrackMean, 2));
                    writer.WriteNumber("realTrackP50Us", Math.Round(report.RealTrackP50, 2));
                }

                writer.WriteNumber("agreement", report.Agreement);
                writer.WriteStartArray("disagreements");
                foreach (var (point, resolveCount, method, fullCount) in report.Disagreements)
                {
                    writer.WriteStartObject();
                    writer.WriteStartArray("point");
                    foreach (var value in point)
                    {
                        writer.WriteNumberValue(value);
                    }

                    writer.WriteEndArray();
                    writer.WriteNumber("resolveRealCount", resolveCount);
                    writer.WriteString("method", method);
                    writer.WriteNumber("fullRealCount", fullCount);
                    writer.WriteEndObject();
                }

                writer.WriteEndArray();
                writer.WriteNumber("relayFibers", report.RelayFibers);
                writer.WriteNumber("relaySeconds", Math.Round(report.RelaySeconds, 3));
                writer.WriteNumber("meanRealCount", Math.Round(report.MeanRealCount, 3));
                writer.WriteEndObject();
            });
            return CommandLine.Success;
        });
        return command;
    }

    private static Command CreateSolve(TextWriter output)
    {
        var points = new Option<int>("--points")
        {
            Description = "Random points of the four-bus microgrid box for the parameter homotopy.",
            DefaultValueFactory = _ => 2000,
        };
        var quick = new Option<bool>("--quick") { Description = "Skip the long total-degree solve of cyclic-7." };
        var seed = new Option<int>("--seed") { Description = "Seed of the random points.", DefaultValueFactory = _ => 7 };
        var command = new Command(
            "solve",
            "Parameter-homotopy paths per second on one core (four-bus microgrid) and total-degree solves of Katsura-8 and cyclic-7 on all cores.");
        command.Options.Add(points);
        command.Options.Add(quick);
        command.Options.Add(seed);
        command.SetAction(parse =>
        {
            var count = parse.GetValue(points);
            if (count <= 0)
            {
                throw new UsageException($"--points must be positive, got {count}");
            }

            var family = ExampleCatalog.Load("microgrid4");
            var single = SolveOptions.Default with { MaxDegreeOfParallelism = 1 };
            var solver = new FiberSolver(family.System, single);
            var start = solver.CreateStartFiber(family.ContentHash, family.Parameters);
            var random = new SeededRandom((ulong)parse.GetValue(seed));
            var targets = Enumerable.Range(0, count)
                .Select(_ => family.Parameters.Select(p => new Complex(random.NextDouble(p.Low, p.High), 0)).ToArray()).ToArray();
            // Steady state, as a long-running worker sees it: the JIT promotes the hot loops to optimized code only
            // after many calls and a background delay, so a short warm-up would measure tier-0 code.
            var warmup = Stopwatch.StartNew();
            var warmSolves = 0;
            while (warmup.Elapsed < TimeSpan.FromSeconds(3))
            {
                solver.Solve(start, targets[warmSolves++ % targets.Length]);
            }

            long paths = 0;
            long steps = 0;
            long rejections = 0;
            var failed = 0;
            var clock = Stopwatch.StartNew();
            foreach (var target in targets)
            {
                var solution = solver.Solve(start, target);
                paths += solution.PathsTracked;
                steps += solution.Paths.Sum(p => (long)p.Steps);
                rejections += solution.Paths.Sum(p => (long)p.Rejections);
                failed += solution.StatusCounts[PathStatus.Failed];
            }

            var seconds = clock.Elapsed.TotalSeconds;
            var totals = new List<(string Name, FiberSolution Solution, double Seconds)>();
            foreach (var benchmark in parse.GetValue(quick) ? [BenchmarkFamilies.Katsura(8)] : new[] { BenchmarkFamilies.Katsura(8), BenchmarkFamilies.Cyclic(7) })
            {
                var allCores = new FiberSolver(benchmark.System);
                clock.Restart();
                var solution = allCores.SolveTotalDegree([]);
                totals.Add((benchmark.Name, solution, clock.Elapsed.TotalSeconds));
            }

            JsonOutput.Write(output, writer =>
            {
                writer.WriteStartObject();
                MachineDescription.Write(writer);
                writer.WriteStartObject("parameterHomotopy");
                writer.WriteString("family", "microgrid4");
                writer.WriteNumber("rootCount", start.RootCount);
                writer.WriteNumber("points", count);
                writer.WriteNumber("threads", 1);
                writer.WriteNumber("warmupSolves", warmSolves);
                writer.WriteNumber("paths", paths);
                writer.WriteNumber("pathsPerSecondPerCore", Math.Round(paths / seconds));
                writer.WriteNumber("microsecondsPerPath", Math.Round(1e6 * seconds / paths, 2));
                writer.WriteNumber("stepsPerPath", Math.Round((double)steps / paths, 2));
                writer.WriteNumber("rejectionsPerPath", Math.Round((double)rejections / paths, 2));
                writer.WriteNumber("failedPaths", failed);
                writer.WriteEndObject();
                writer.WriteStartArray("totalDegree");
                foreach (var (name, solution, elapsed) in totals)
                {
                    writer.WriteStartObject();
                    writer.WriteString("family", name);
                    writer.WriteNumber("threads", Environment.ProcessorCount);
                    writer.WriteNumber("paths", solution.PathsTracked);
                    writer.WriteNumber("regular", solution.StatusCounts[PathStatus.Regular]);
                    writer.WriteNumber("singular", solution.StatusCounts[PathStatus.Singular]);
                    writer.WriteNumber("atInfinity", solution.StatusCounts[PathStatus.AtInfinity]);
                    writer.WriteNumber("failed", solution.StatusCounts[PathStatus.Failed]);
                    writer.WriteNumber("failedShare", (double)solution.StatusCounts[PathStatus.Failed] / solution.PathsTracked);
                    writer.WriteNumber("seconds", Math.Round(elapsed, 3));
                    writer.WriteNumber("stepsPerPath", Math.Round(solution.Paths.Average(p => p.Steps), 1));
                    writer.WriteEndObject();
                }

                writer.WriteEndArray();
                writer.WriteEndObject();
            });
            return CommandLine.Success;
        });
        return command;
    }
}
