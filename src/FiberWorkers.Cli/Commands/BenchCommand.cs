using System.CommandLine;
using System.Diagnostics;
using System.Numerics;
using System.Text.Json;
using FiberWorkers.Algebra.Families;
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
        command.Subcommands.Add(CreateResolve(output));
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
                writer.WriteNumber("agreement", report.Agreement);
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
            foreach (var warm in targets.Take(20))
            {
                solver.Solve(start, warm);
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
