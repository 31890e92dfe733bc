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
