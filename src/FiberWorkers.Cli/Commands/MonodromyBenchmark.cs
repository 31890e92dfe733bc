using System.CommandLine;
using System.Diagnostics;
using FiberWorkers.Cli.Examples;
using FiberWorkers.Cli.Output;
using FiberWorkers.Solving.Fibers;
using FiberWorkers.Solving.StartFibers;

namespace FiberWorkers.Cli.Commands;

/// <summary>
/// <c>fiber bench monodromy</c>: time to the generic fiber of a bundled family by monodromy and by a total-degree
/// solve at the same generic point, in one run, with the paths each tracked and the ratio.
/// </summary>
internal static class MonodromyBenchmark
{
    public static Command Create(TextWriter output)
    {
        var example = new Option<string>("--example") { Description = "The bundled family.", DefaultValueFactory = _ => "microgrid5" };
        var seed = new Option<int>("--seed") { Description = "Seed of every random choice.", DefaultValueFactory = _ => 1 };
        var threads = new Option<int>("--threads") { Description = "Threads that track paths (default: all cores).", DefaultValueFactory = _ => Environment.ProcessorCount };
        var rootCount = new Option<int?>("--root-count")
        {
            Description = "A root count the user knows (as the family file's rootCount would state it): monodromy stops when it has that many. Default: the family's own, if it states one.",
        };
        var command = new Command("monodromy", "Time to a family's generic fiber by monodromy vs total degree at the same point; paths tracked by each.");
        command.Options.Add(example);
        command.Options.Add(seed);
        command.Options.Add(threads);
        command.Options.Add(rootCount);
        command.SetAction(parse =>
        {
            var name = parse.GetValue(example)!;
            if (!ExampleCatalog.Names.Contains(name))
            {
                throw new UsageException($"--example: no bundled example '{name}' (see 'fiber examples')");
            }

            var count = parse.GetValue(threads);
            if (count is < 1 or > 4096)
            {
                throw new UsageException($"--threads must be between 1 and 4096, got {count}");
            }

            var hint = parse.GetValue(rootCount);
            if (hint is < 1 or > 1_000_000)
            {
                throw new UsageException($"--root-count must be between 1 and 1000000, got {hint}");
            }

            var family = ExampleCatalog.Load(name);
            hint ??= family.RootCount;
            var options = SolveOptions.Default with { Seed = parse.GetValue(seed), MaxDegreeOfParallelism = count };
            StartFiberResult Run(StartFiberMethod method, SolveOptions settings) =>
                StartFiberFactory.Create(family.System, family.ContentHash, family.Parameters, method, settings, rootCountHint: hint);

            // Warm the JIT for 3 s on both methods at other seeds: hot loops reach optimised code only after many calls
            // and a background delay, so one warm-up run each would still time partly unoptimised code.
            var warmup = Stopwatch.StartNew();
            for (var round = 1; warmup.Elapsed < TimeSpan.FromSeconds(3); round++)
            {
                Run(StartFiberMethod.Monodromy, options with { Seed = options.Seed + round });
                Run(StartFiberMethod.TotalDegree, options with { Seed = options.Seed + round });
            }

            // Same seed: both reach the fiber over the same generic point; each timed three times, the median kept.
            StartFiberResult monodromy = null!, total = null!;
            var monodromyTimes = new double[3];
            var totalTimes = new double[3];
            var clock = new Stopwatch();
            for (var repeat = 0; repeat < 3; repeat++)
            {
                clock.Restart();
                monodromy = Run(StartFiberMethod.Monodromy, options);
                monodromyTimes[repeat] = clock.Elapsed.TotalSeconds;
                clock.Restart();
                total = Run(StartFiberMethod.TotalDegree, options);
                totalTimes[repeat] = clock.Elapsed.TotalSeconds;
            }

            var monodromySeconds = monodromyTimes.Order().ElementAt(1);
            var totalSeconds = totalTimes.Order().ElementAt(1);
            var report = monodromy.Monodromy!;

            JsonOutput.Write(output, writer =>
            {
                writer.WriteStartObject();
                MachineDescription.Write(writer);
                writer.WriteString("family", name);
                writer.WriteNumber("threads", count);
                if (hint is { } stated)
                {
                    writer.WriteNumber("rootCountHint", stated);
                }
                else
                {
                    writer.WriteNull("rootCountHint");
                }
                writer.WriteStartObject("monodromy");
                writer.WriteNumber("seconds", Math.Round(monodromySeconds, 3));
                writer.WriteNumber("rootCount", monodromy.Fiber.RootCount);
                writer.WriteNumber("nodes", report.Nodes);
                writer.WriteNumber("edges", report.Edges);
                writer.WriteNumber("loops", report.Loops);
                writer.WriteNumber("segmentTracks", report.SegmentTracks);
                writer.WriteNumber("finalPaths", report.FinalPaths);
                writer.WriteNumber("tracePaths", report.TracePaths);
                writer.WriteNumber("paths", report.SegmentTracks + report.FinalPaths + report.TracePaths);
                writer.WriteNumber("failedTracks", report.FailedTracks);
                writer.WriteBoolean("augmented", report.Augmented);
                writer.WriteString("completeness", report.Completeness);
                writer.WriteEndObject();
                writer.WriteStartObject("totalDegree");
                writer.WriteNumber("seconds", Math.Round(totalSeconds, 3));
                writer.WriteNumber("paths", total.Fiber.Provenance.PathsTracked);
                writer.WriteNumber("rootCount", total.Fiber.RootCount);
                writer.WriteString("completeness", total.Fiber.Provenance.Completeness);
                writer.WriteEndObject();
                writer.WriteNumber("speedup", Math.Round(totalSeconds / monodromySeconds, 2));
                writer.WriteBoolean("sameRootCount", monodromy.Fiber.RootCount == total.Fiber.RootCount);
                writer.WriteEndObject();
            });
            return CommandLine.Success;
        });
        return command;
    }
}
