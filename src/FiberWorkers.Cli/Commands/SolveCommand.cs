using System.CommandLine;
using System.Text.Json;
using FiberWorkers.Algebra.Families;
using FiberWorkers.Cli.Output;
using FiberWorkers.Solving.Certification;
using FiberWorkers.Solving.Fibers;
using FiberWorkers.Solving.StartFibers;

namespace FiberWorkers.Cli.Commands;

/// <summary>
/// <c>fiber solve FAMILY --at P=..,Q=.. [--json] [--method ..]</c>: the real solutions of one fiber, with the real
/// count and whether it is certified.
/// </summary>
internal static class SolveCommand
{
    public static Command Create(TextWriter output, TextWriter error)
    {
        var family = new FamilyArguments();
        var at = new Option<string?>("--at") { Description = "The parameter point, e.g. P2=0.3,P3=-0.1,P4=0.2 (every parameter once)." };
        var json = new Option<bool>("--json") { Description = "Print one JSON object instead of text." };
        var method = new Option<string>("--method")
        {
            Description = "auto (default), total-degree, parameter (start fiber by total degree), or monodromy (start fiber by monodromy).",
            DefaultValueFactory = _ => "auto",
        };
        method.AcceptOnlyFromAmong("auto", "total-degree", "parameter", "monodromy");
        var startFiber = new Option<string?>("--start-fiber")
        {
            Description = "Start-fiber file for the parameter method: read if it exists, otherwise computed and written there.",
        };
        var seed = new Option<int>("--seed") { Description = "Seed of every random choice.", DefaultValueFactory = _ => 1 };
        var threads = new Option<int>("--threads")
        {
            Description = "Threads that track paths (default: all cores).",
            DefaultValueFactory = _ => Environment.ProcessorCount,
        };
        var maxPaths = new Option<long>("--max-paths")
        {
            Description = "Refuse a total-degree solve with more paths than this.",
            DefaultValueFactory = _ => SolveOptions.Default.MaxPaths,
        };

        var command = new Command("solve", "Solve one fiber: all real solutions at a parameter point, with a certified real count.");
        family.AddTo(command);
        foreach (var option in new Option[] { at, json, method, startFiber, seed, threads, maxPaths })
        {
            command.Options.Add(option);
        }

        command.SetAction(parse =>
        {
            var definition = family.Load(parse);
            var point = ParameterPoint.Parse(parse.GetValue(at), definition);
            var options = SolveOptions.Default with
            {
                Seed = parse.GetValue(seed),
                MaxDegreeOfParallelism = Positive(parse.GetValue(threads), "--threads"),
                MaxPaths = Positive(parse.GetValue(maxPaths), "--max-paths"),
            };
            var solver = new FiberSolver(definition.System, options);
            var chosen = parse.GetValue(method)!;
            var startFile = parse.GetValue(startFiber);
            FiberSolution solution;
            string how;
            try
            {
                if (chosen == "total-degree")
                {
                    solution = solver.SolveTotalDegree(FiberOutput.ToComplex(point));
                    how = $"total-degree homotopy, {solution.PathsTracked} paths (Bézout number)";
                }
                else
                {
                    var start = ObtainStartFiber(definition, options, chosen, startFile, out var obtained);
                    solution = solver.Solve(start, FiberOutput.ToComplex(point));
                    how = $"parameter homotopy from a start fiber of {start.RootCount} solutions ({obtained})";
                    if (definition.RootCount is { } expected && start.RootCount != expected)
                    {
                        error.WriteLine($"warning: the family file expects {expected} solutions; the start fiber has {start.RootCount}");
                    }
                }
            }
            catch (PathLimitExceededException e)
            {
                throw new InputException(definition.Source, string.Empty, e.Message);
            }

            if (parse.GetValue(json))
            {
                JsonOutput.Write(output, writer => WriteJson(writer, definition, point, solution.Method, solution));
            }
            else
            {
                output.WriteLine($"family      {definition.Name}");
                output.WriteLine($"at          {ParameterPoint.Format(definition, point)}");
                output.WriteLine($"method      {how}");
                FiberOutput.WriteText(output, definition, solution);
            }

            return CommandLine.Success;
        });
        return command;
    }

    /// <summary>
    /// The start fiber for a solve: read from <paramref name="path"/> when it exists (its family hash must match),
    /// otherwise computed by the method asked for (parameter: total degree; monodromy; auto: by the Bézout number)
    /// and written to <paramref name="path"/> when one is given.
    /// </summary>
    internal static StartFiber ObtainStartFiber(FamilyDefinition family, SolveOptions options, string method, string? path, out string obtained)
    {
        if (path is not null && File.Exists(path))
        {
            var known = StartFiberFile.Load(path, family.ContentHash);
            obtained = $"read from {Path.GetFileName(path)}; {known.Provenance.Method}, {known.Provenance.PathsTracked} paths";
            return known;
        }

        var kind = method switch
        {
            "parameter" => StartFiberMethod.TotalDegree,
            "monodromy" => StartFiberMethod.Monodromy,
            _ => StartFiberMethod.Auto,
        };
        var result = StartFiberFactory.Create(family.System, family.ContentHash, family.Parameters, kind, options, rootCountHint: family.RootCount);
        var start = result.Fiber;
        obtained = $"{result.Decision}; {start.Provenance.Method}, {start.Provenance.PathsTracked} paths, completeness: {start.Provenance.Completeness}";
        if (path is not null)
        {
            StartFiberFile.Save(start, path);
            obtained += $"; saved to {Path.GetFileName(path)}";
        }

        return start;
    }

    private static void WriteJson(Utf8JsonWriter writer, FamilyDefinition family, double[] point, string method, FiberSolution solution)
    {
        writer.WriteStartObject();
        writer.WriteString("family", family.Name);
        writer.WriteStartObject("parameters");
        for (var k = 0; k < point.Length; k++)
        {
            writer.WriteNumber(family.Parameters[k].Name, point[k]);
        }

        writer.WriteEndObject();
        writer.WriteString("method", method);
        writer.WriteNumber("realCount", solution.RealCount);
        writer.WriteBoolean("realCountCertified", solution.RealCountCertified);
        writer.WriteNumber("rootCount", solution.RootCount);
        writer.WriteNumber("pathsTracked", solution.PathsTracked);
        FiberOutput.WritePathStatus(writer, solution);
        FiberOutput.WriteSolutions(writer, family.Unknowns, solution.Solutions);
        writer.WriteString("caveat", Certificate.FloatingPointCaveat);
        writer.WriteString("caution", FiberOutput.Caution);
        writer.WriteEndObject();
    }

    private static T Positive<T>(T value, string option)
        where T : System.Numerics.INumber<T>
    {
        if (value <= T.Zero)
        {
            throw new UsageException($"{option} must be positive, got {value}");
        }

        return value;
    }
}
