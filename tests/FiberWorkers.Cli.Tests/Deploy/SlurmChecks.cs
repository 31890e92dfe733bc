using System.Diagnostics;
using System.Text.RegularExpressions;

namespace FiberWorkers.Cli.Tests.Deploy;

/// <summary>
/// Checks deploy/slurm/*.sbatch: <c>bash -n</c>, #SBATCH directives before the first command (sbatch ignores later
/// ones), every <c>fiber</c> command line against the command tree with the script's defaults filled in, servers run
/// as job steps (<c>srun</c>), the workers and the sweep reach the coordinator's port, and a cleanup trap on EXIT.
/// </summary>
internal static partial class SlurmChecks
{
    /// <summary>What Slurm sets for a batch script (sbatch(1), "OUTPUT ENVIRONMENT VARIABLES"), with sample values.</summary>
    private static readonly Dictionary<string, string> SlurmEnvironment = new(StringComparer.Ordinal)
    {
        ["SLURM_JOB_ID"] = "4242",
        ["SLURM_JOB_NODELIST"] = "node[01-03]",
        ["SLURM_JOB_NUM_NODES"] = "3",
        ["SLURM_SUBMIT_DIR"] = "/home/user/runs",
        ["SLURM_CPUS_PER_TASK"] = "16",
    };

    public static List<string> Run(DeployFiles files, FiberCommandCheck fiber)
    {
        var problems = new List<string>();
        var scripts = files.All().Where(f => f.StartsWith("deploy/slurm/", StringComparison.Ordinal) && f.EndsWith(".sbatch", StringComparison.Ordinal)).ToList();
        if (scripts.Count == 0)
        {
            problems.Add("deploy/slurm:1: no .sbatch script");
        }

        foreach (var script in scripts)
        {
            CheckScript(files, script, fiber, problems);
        }

        return problems;
    }

    private static void CheckScript(DeployFiles files, string script, FiberCommandCheck fiber, List<string> problems)
    {
        var syntax = BashSyntax(files.Full(script));
        if (syntax is not null)
        {
            var line = BashLine().Match(syntax) is { Success: true } m ? m.Groups["line"].Value : "1";
            problems.Add($"{script}:{line}: bash -n fails: {syntax}");
        }

        var lines = files.Lines(script);
        var header = true;
        for (var k = 1; k < lines.Length; k++)
        {
            var line = lines[k].Trim();
            if (line.Length > 0 && !line.StartsWith('#'))
            {
                header = false;
            }
            else if (!header && line.StartsWith("#SBATCH", StringComparison.Ordinal))
            {
                problems.Add($"{script}:{k + 1}: #SBATCH after the first command is ignored by sbatch; move it up");
            }
        }

        if (!lines.Any(l => CleanupTrap().IsMatch(l)))
        {
            problems.Add($"{script}:1: no 'trap FUNCTION EXIT': the servers would outlive a failed or cancelled job step");
        }

        // Variables in the order the script sets them: a static value where the script's defaults give one, a
        // sample where it is computed (node names, loop variables), nothing where it is never set.
        var variables = new Dictionary<string, string>(StringComparer.Ordinal);
        string? Resolve(string name) => variables.TryGetValue(name, out var value) ? value : SlurmEnvironment.GetValueOrDefault(name);
        var invocations = new List<(FiberInvocation Fiber, bool Step)>();
        foreach (var line in ShellWords.LogicalLines(lines))
        {
            if (Assignment().Match(line.Text) is { Success: true } assignment)
            {
                var name = assignment.Groups["name"].Value;
                var words = ShellWords.Split(assignment.Groups["value"].Value, Resolve);
                variables[name] = words.Count == 1 && words[0].Unknown.Count == 0 ? words[0].Text
                    : words.Count == 0 ? string.Empty
                    : $"dynamic-{name.ToLowerInvariant().Replace('_', '-')}";
                continue;
            }

            if (Loop().Match(line.Text) is { Success: true } loop)
            {
                variables[loop.Groups["name"].Value] = $"dynamic-{loop.Groups["name"].Value}";
            }

            if (Mapfile().Match(line.Text) is { Success: true } mapfile)
            {
                variables[mapfile.Groups["name"].Value] = $"dynamic-{mapfile.Groups["name"].Value.ToLowerInvariant()}";
            }

            var all = ShellWords.Split(line.Text, Resolve);
            var at = all.FindIndex(w => w.Raw is "\"$FIBER\"" or "$FIBER" or "\"${FIBER}\"" or "${FIBER}");
            if (at < 0)
            {
                continue;
            }

            var args = all.Skip(at + 1).TakeWhile(w => !w.IsOperator).ToList();
            foreach (var word in args)
            {
                foreach (var unknown in word.Unknown.Where(u => Name().IsMatch(u)))
                {
                    problems.Add($"{script}:{line.LineOf(word.Start)}: ${unknown} is never set in the script (nor by Slurm)");
                }
            }

            var invocation = fiber.Check([.. args.Select(w => (w.Text, $"{script}:{line.LineOf(w.Start)}"))], $"{script}:{line.Line}", variables.Keys.ToHashSet(StringComparer.Ordinal), problems);
            if (invocation is not null)
            {
                invocations.Add((invocation, all.Take(at).Any(w => w.Text == "srun")));
            }
        }

        var coordinators = invocations.Where(i => i.Fiber.Command == "serve coordinator").ToList();
        var workers = invocations.Where(i => i.Fiber.Command == "serve worker").ToList();
        var clients = invocations.Where(i => i.Fiber.Command is "sweep" or "ask").ToList();
        if (coordinators.Count != 1 || workers.Count == 0 || clients.Count == 0)
        {
            problems.Add($"{script}:1: expected one 'fiber serve coordinator', workers and a client sweep; found {coordinators.Count}, {workers.Count} and {clients.Count}");
            return;
        }

        foreach (var (server, step) in coordinators.Concat(workers))
        {
            if (!step)
            {
                problems.Add($"{server.Where}: 'fiber {server.Command}' should run as a job step (srun ... \"$FIBER\" ...)");
            }
        }

        var listen = coordinators[0].Fiber.Listen;
        var url = workers[0].Fiber["--coordinator"];
        foreach (var (caller, _) in workers.Concat(clients))
        {
            if (caller.Url("--coordinator") is { } target && listen is not null && target.Port != listen.Port)
            {
                problems.Add($"{caller.WhereOf("--coordinator")}: calls the coordinator on port {target.Port}, but it listens on {listen.Port} ({coordinators[0].Fiber.WhereOf("--listen")})");
            }

            if (caller["--coordinator"] != url)
            {
                problems.Add($"{caller.WhereOf("--coordinator")}: --coordinator {caller["--coordinator"]} differs from the workers' {url}");
            }
        }
    }

    /// <summary>bash's own syntax check; null when it passes.</summary>
    private static string? BashSyntax(string path)
    {
        using var bash = Process.Start(new ProcessStartInfo("bash", ["-n", path]) { RedirectStandardError = true, RedirectStandardOutput = true })!;
        var error = bash.StandardError.ReadToEnd();
        bash.WaitForExit();
        return bash.ExitCode == 0 ? null : $"exit code {bash.ExitCode}: {error.Trim()}";
    }

    [GeneratedRegex(@"^(?<name>[A-Za-z_][A-Za-z0-9_]*)=(?<value>.*)$")]
    private static partial Regex Assignment();

    [GeneratedRegex(@"^\s*for\s+(?<name>[A-Za-z_][A-Za-z0-9_]*)\s+in\b")]
    private static partial Regex Loop();

    [GeneratedRegex(@"^\s*mapfile\s+(?:-\w+\s+)*(?<name>[A-Za-z_][A-Za-z0-9_]*)\b")]
    private static partial Regex Mapfile();

    [GeneratedRegex(@"^trap\s+\S+\s+(?:\S+\s+)*EXIT\b")]
    private static partial Regex CleanupTrap();

    [GeneratedRegex(@"line (?<line>\d+):")]
    private static partial Regex BashLine();

    [GeneratedRegex("^[A-Za-z_][A-Za-z0-9_]*$")]
    private static partial Regex Name();
}
