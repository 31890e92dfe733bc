using System.CommandLine;
using FiberWorkers.Algebra.Families;
using FiberWorkers.Cli.Commands;

namespace FiberWorkers.Cli;

/// <summary>
/// Builds the <c>fiber</c> command tree and runs it with the project's exit codes:
/// 0 success, 1 invalid input (the message names file and place), 2 bad command usage, 3 internal error,
/// 4 a cluster service refused or could not be reached.
/// </summary>
internal static class CommandLine
{
    public const int Success = 0;
    public const int InvalidInput = 1;
    public const int BadUsage = 2;
    public const int InternalError = 3;
    public const int ServiceError = 4;

    public static RootCommand Build(TextWriter output, TextWriter error)
    {
        var root = new RootCommand(
            "fiber: how many real solutions a parameterized polynomial system has where, and what they are.");
        root.Subcommands.Add(CheckCommand.Create(output));
        root.Subcommands.Add(ExamplesCommand.Create(output));
        root.Subcommands.Add(SolveCommand.Create(output, error));
        root.Subcommands.Add(SweepCommand.Create(output, error));
        root.Subcommands.Add(AtlasCommand.Create(output));
        root.Subcommands.Add(ExportCommand.Create(output));
        root.Subcommands.Add(MapCommand.Create(output));
        root.Subcommands.Add(LearnCommand.Create(output));
        root.Subcommands.Add(LabelCommand.Create(output));
        root.Subcommands.Add(StudyCommand.Create(output, error));
        root.Subcommands.Add(AskCommand.Create(output, error));
        root.Subcommands.Add(BenchCommand.Create(output));
        root.Subcommands.Add(ServeCommand.Create(error));
        root.Subcommands.Add(CertsCommand.Create(output));
        return root;
    }

    /// <summary>The parser names the expected .NET type; say what kind of value it wants instead.</summary>
    internal static string Readable(string message) => System.Text.RegularExpressions.Regex.Replace(
        message,
        @"System\.(?:Nullable`1\[System\.)?(Int32|Int64|Double|UInt64)\]?",
        match => match.Groups[1].Value switch
        {
            "Double" => "number",
            _ => "integer",
        });

    /// <summary>
    /// A token that looks like an option but was taken as a command's argument (an unknown option where a FAMILY or
    /// ATLAS argument may stand), or null. The parser would otherwise read it as a file name.
    /// </summary>
    private static string? UnknownOption(ParseResult parse) => parse.CommandResult.Children
        .OfType<System.CommandLine.Parsing.ArgumentResult>()
        .SelectMany(argument => argument.Tokens)
        .Select(token => token.Value)
        .FirstOrDefault(value => value.StartsWith("--", StringComparison.Ordinal) && !File.Exists(value));

    /// <summary>The command names from below the root down to <paramref name="command"/>.</summary>
    private static IEnumerable<string> Path(System.CommandLine.Parsing.CommandResult command)
    {
        var names = new Stack<string>();
        for (var at = command; at?.Parent is not null; at = at.Parent as System.CommandLine.Parsing.CommandResult)
        {
            names.Push(at.Command.Name);
        }

        return names;
    }

    public static async Task<int> RunAsync(string[] args, TextWriter output, TextWriter error)
    {
        var root = Build(output, error);
        var parse = root.Parse(args);
        if (UnknownOption(parse) is { } unknown)
        {
            await error.WriteLineAsync($"fiber: unknown option '{unknown}' for '{parse.CommandResult.Command.Name}'");
            await error.WriteLineAsync($"Run 'fiber {string.Join(' ', Path(parse.CommandResult))} --help' for its options.");
            return BadUsage;
        }

        if (parse.Errors.Count > 0)
        {
            foreach (var problem in parse.Errors)
            {
                await error.WriteLineAsync($"fiber: {Readable(problem.Message)}");
            }

            await error.WriteLineAsync("Run 'fiber --help' for usage.");
            return BadUsage;
        }

        try
        {
            // Servers stop on SIGTERM/Ctrl+C through their host, which lets calls in flight finish; the parser's own
            // handler would end the process two seconds after the signal.
            var serving = args.Length > 0 && args[0] == "serve";
            var configuration = new InvocationConfiguration { EnableDefaultExceptionHandler = false, Output = output, Error = error };
            if (serving)
            {
                configuration.ProcessTerminationTimeout = null;
            }

            return await parse.InvokeAsync(configuration);
        }
        catch (UsageException e)
        {
            await error.WriteLineAsync($"fiber: {e.Message}");
            return BadUsage;
        }
        catch (InputException e)
        {
            await error.WriteLineAsync(e.Message);
            return InvalidInput;
        }
        catch (ListenException)
        {
            return InvalidInput;
        }
        catch (Grpc.Core.RpcException e) when (e.StatusCode == Grpc.Core.StatusCode.Cancelled)
        {
            await error.WriteLineAsync("fiber: cancelled");
            return InvalidInput;
        }
        catch (Grpc.Core.RpcException e)
        {
            var detail = string.IsNullOrEmpty(e.Status.Detail) ? e.StatusCode.ToString() : e.Status.Detail;
            if (e.StatusCode is Grpc.Core.StatusCode.InvalidArgument or Grpc.Core.StatusCode.NotFound or Grpc.Core.StatusCode.FailedPrecondition or Grpc.Core.StatusCode.OutOfRange)
            {
                await error.WriteLineAsync($"fiber: the service refused the request: {detail}");
                return InvalidInput;
            }

            await error.WriteLineAsync(e.StatusCode == Grpc.Core.StatusCode.Unavailable && e.Status.DebugException is not null
                ? $"fiber: cannot reach the service ({e.Status.DebugException.Message})"
                : $"fiber: the service answered {e.StatusCode}: {detail}");
            return ServiceError;
        }
        catch (OperationCanceledException)
        {
            await error.WriteLineAsync("fiber: cancelled");
            return InvalidInput;
        }
        catch (Exception e)
        {
            await error.WriteLineAsync($"fiber: internal error: {e.Message}");
            if (Environment.GetEnvironmentVariable("FIBER_DEBUG") == "1")
            {
                await error.WriteLineAsync(e.ToString());
            }

            return InternalError;
        }
    }
}

/// <summary>Bad command usage that the parser cannot see (conflicting or missing options); exit code 2.</summary>
internal sealed class UsageException(string message) : Exception(message);
