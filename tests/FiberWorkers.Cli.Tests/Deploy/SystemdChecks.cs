using System.Globalization;
using System.Text;
using System.Text.RegularExpressions;

namespace FiberWorkers.Cli.Tests.Deploy;

/// <summary>
/// Checks deploy/systemd: each unit's ExecStart against the command tree with the variables of the environment file
/// example it names (as shipped, and with its commented-out alternatives switched on), every <c>${VAR}</c>/<c>$VAR</c>
/// against that file, the stop, restart and hardening settings, and that workers reach the coordinator's port.
/// </summary>
internal static partial class SystemdChecks
{
    /// <summary>What the instance specifier stands for in the checks: worker units are instantiated by port.</summary>
    private const string InstanceSample = "7401";

    private sealed record Setting(string Section, string Key, string Value, int Line, IReadOnlyList<int> Joins)
    {
        public int LineOf(int offset) => Line + Joins.Count(j => j <= offset);
    }

    public static List<string> Run(DeployFiles files, FiberCommandCheck fiber, int shutdownSeconds)
    {
        var problems = new List<string>();
        var units = files.All().Where(f => f.StartsWith("deploy/systemd/", StringComparison.Ordinal) && f.EndsWith(".service", StringComparison.Ordinal)).ToList();
        if (units.Count == 0)
        {
            problems.Add("deploy/systemd:1: no .service units");
            return problems;
        }

        var invocations = new List<FiberInvocation>();
        foreach (var unit in units)
        {
            invocations.AddRange(CheckUnit(files, unit, fiber, shutdownSeconds, problems));
        }

        var coordinators = invocations.Where(i => i.Command == "serve coordinator").ToList();
        foreach (var worker in invocations.Where(i => i.Command == "serve worker"))
        {
            foreach (var coordinator in coordinators)
            {
                if (worker.Url("--coordinator") is { } url && coordinator.Listen is { } listen && url.Port != listen.Port)
                {
                    problems.Add($"{worker.WhereOf("--coordinator")}: the worker calls the coordinator on port {url.Port}, but it listens on {listen.Port} ({coordinator.WhereOf("--listen")})");
                }
            }
        }

        return [.. problems.Distinct()];
    }

    private static List<FiberInvocation> CheckUnit(DeployFiles files, string unit, FiberCommandCheck fiber, int shutdownSeconds, List<string> problems)
    {
        var settings = Parse(files.Lines(unit));
        var name = Path.GetFileName(unit);
        var template = name.Contains("@.", StringComparison.Ordinal);
        string? Get(string key) => settings.LastOrDefault(s => s.Section == "Service" && s.Key == key)?.Value;
        string Where(string key) => settings.LastOrDefault(s => s.Key == key) is { } s ? $"{unit}:{s.Line}" : $"{unit}:1";

        // The environment: each EnvironmentFile's example in deploy/systemd, and Environment= lines.
        var variants = new List<(string Label, Dictionary<string, string> Variables)> { (string.Empty, new(StringComparer.Ordinal)) };
        var alternatives = new Dictionary<string, string>(StringComparer.Ordinal);
        foreach (var file in settings.Where(s => s.Section == "Service" && s.Key == "EnvironmentFile"))
        {
            var path = file.Value.TrimStart('-');
            var example = $"deploy/systemd/{Path.GetFileName(path)}.example";
            if (!path.StartsWith("/etc/fiber/", StringComparison.Ordinal) || !File.Exists(files.Full(example)))
            {
                problems.Add($"{unit}:{file.Line}: EnvironmentFile={file.Value} has no example {example} (install it as /etc/fiber/NAME from deploy/systemd/NAME.example)");
                continue;
            }

            var (values, commented) = EnvironmentFile(files.Lines(example));
            foreach (var (key, value) in values)
            {
                variants[0].Variables[key] = value;
            }

            foreach (var (key, value) in commented)
            {
                alternatives[key] = value;
            }

            if (commented.Count > 0)
            {
                variants.Add(($"with the commented-out settings of {example} switched on: ", []));
            }
        }

        foreach (var environment in settings.Where(s => s.Section == "Service" && s.Key == "Environment"))
        {
            foreach (var assignment in environment.Value.Split(' ', StringSplitOptions.RemoveEmptyEntries))
            {
                var equals = assignment.IndexOf('=', StringComparison.Ordinal);
                if (equals > 0)
                {
                    variants[0].Variables[assignment[..equals].Trim('"')] = assignment[(equals + 1)..].Trim('"');
                }
            }
        }

        if (variants.Count > 1)
        {
            variants[1] = (variants[1].Label, new Dictionary<string, string>(variants[0].Variables.Concat(alternatives).GroupBy(p => p.Key).Select(g => g.Last()), StringComparer.Ordinal));
        }

        var invocations = new List<FiberInvocation>();
        var execStarts = settings.Where(s => s.Section == "Service" && s.Key == "ExecStart").ToList();
        if (execStarts.Count != 1)
        {
            problems.Add($"{unit}:1: needs exactly one ExecStart= in [Service], has {execStarts.Count}");
        }

        foreach (var (label, variables) in variants)
        {
            var found = new List<string>();
            foreach (var setting in settings)
            {
                foreach (Match match in Variable().Matches(setting.Value))
                {
                    var variable = match.Groups["braced"].Success ? match.Groups["braced"].Value : match.Groups["plain"].Value;
                    if (!variables.ContainsKey(variable))
                    {
                        found.Add($"{unit}:{setting.LineOf(match.Index)}: ${{{variable}}} is not defined in the environment file example ({string.Join(", ", settings.Where(s => s.Key == "EnvironmentFile").Select(s => s.Value))}) or an Environment= line");
                    }
                }
            }

            foreach (var exec in execStarts)
            {
                var words = Words(exec, unit, name, variables, found);
                if (words.Count == 0)
                {
                    continue;
                }

                var executable = words[0].Text;
                if (!executable.StartsWith('/') || Path.GetFileName(executable) != "fiber")
                {
                    found.Add($"{words[0].Where}: ExecStart runs '{executable}', not the absolute path of the fiber executable");
                }

                var invocation = fiber.Check(words.Skip(1).ToList(), $"{unit}:{exec.Line}", variables.Keys.ToHashSet(StringComparer.Ordinal), found);
                if (invocation is null)
                {
                    continue;
                }

                if (!FiberCommandCheck.Deployed.Contains(invocation.Command) || !invocation.Command.StartsWith("serve ", StringComparison.Ordinal))
                {
                    found.Add($"{invocation.Where}: a unit runs a server ('fiber serve coordinator' or 'fiber serve worker'), not 'fiber {invocation.Command}'");
                }

                if (template && invocation.Listen is { } listen && listen.Port.ToString(CultureInfo.InvariantCulture) != InstanceSample)
                {
                    found.Add($"{invocation.WhereOf("--listen")}: the instance name of {name} is the worker's port (fiber-worker@7401): --listen should end in :%i");
                }

                if (invocation["--store"] is { } store && store.StartsWith("sqlite:", StringComparison.OrdinalIgnoreCase))
                {
                    var state = Get("StateDirectory");
                    if (state is null || !store["sqlite:".Length..].StartsWith($"/var/lib/{state}/", StringComparison.Ordinal))
                    {
                        found.Add($"{invocation.WhereOf("--store")}: the SQLite file must be under /var/lib/<StateDirectory>/ (StateDirectory={state ?? "unset"}): with ProtectSystem=strict nothing else is writable");
                    }
                }

                if (label.Length == 0)
                {
                    invocations.Add(invocation);
                }
            }

            // A variant's own problems say which variant: "file:line: with ... switched on: what is wrong".
            problems.AddRange(label.Length == 0 ? found : found.Where(p => !problems.Contains(p)).Select(p => p.Insert(p.IndexOf(": ", StringComparison.Ordinal) + 2, label)));
        }

        Require(Get("Restart") == "on-failure", $"{Where("Restart")}: Restart=on-failure, so a crash restarts the server and a clean stop does not", problems);
        Require(Get("KillSignal") == "SIGTERM", $"{Where("KillSignal")}: KillSignal=SIGTERM: the servers stop gracefully on it", problems);
        var timeout = Get("TimeoutStopSec") is { } text && double.TryParse(text.TrimEnd('s'), NumberStyles.Float, CultureInfo.InvariantCulture, out var seconds) ? seconds : (double?)null;
        Require(timeout >= shutdownSeconds + 5, $"{Where("TimeoutStopSec")}: TimeoutStopSec={Get("TimeoutStopSec") ?? "(unset)"} should exceed the server's {shutdownSeconds} s shutdown timeout by at least 5 s", problems);
        Require(Get("NoNewPrivileges") == "yes", $"{Where("NoNewPrivileges")}: NoNewPrivileges=yes", problems);
        Require(Get("ProtectSystem") == "strict", $"{Where("ProtectSystem")}: ProtectSystem=strict", problems);
        Require(Get("PrivateTmp") == "yes", $"{Where("PrivateTmp")}: PrivateTmp=yes", problems);
        Require(Get("DynamicUser") == "yes" || Get("User") is { } user && user is not ("root" or "0"), $"{unit}:1: run as DynamicUser=yes or a dedicated User=, not root", problems);
        Require(Get("MemoryDenyWriteExecute") != "yes", $"{Where("MemoryDenyWriteExecute")}: MemoryDenyWriteExecute=yes stops the .NET JIT", problems);
        Require(settings.Any(s => s.Section == "Install" && s.Key == "WantedBy"), $"{unit}:1: an [Install] section with WantedBy=, so that systemctl enable works", problems);
        return invocations;
    }

    private static void Require(bool condition, string problem, List<string> problems)
    {
        if (!condition)
        {
            problems.Add(problem);
        }
    }

    /// <summary>ExecStart's words as systemd makes them: specifiers, quotes, then <c>${VAR}</c> and <c>$VAR</c>.</summary>
    private static List<(string Text, string Where)> Words(Setting exec, string unit, string name, Dictionary<string, string> variables, List<string> problems)
    {
        var value = exec.Value.TrimStart('-', '@', ':', '+', '!');
        var shift = exec.Value.Length - value.Length;
        var words = new List<(string Text, string Where)>();
        var position = 0;
        while (position < value.Length)
        {
            while (position < value.Length && char.IsWhiteSpace(value[position]))
            {
                position++;
            }

            if (position >= value.Length)
            {
                break;
            }

            var start = position;
            var word = new StringBuilder();
            var quoted = false;
            while (position < value.Length && !char.IsWhiteSpace(value[position]))
            {
                var c = value[position];
                if (c is '"' or '\'')
                {
                    quoted = true;
                    var end = value.IndexOf(c, position + 1);
                    end = end < 0 ? value.Length : end;
                    word.Append(value, position + 1, end - position - 1);
                    position = Math.Min(end + 1, value.Length);
                }
                else if (c == '\\' && position + 1 < value.Length)
                {
                    word.Append(value[position + 1]);
                    position += 2;
                }
                else
                {
                    word.Append(c);
                    position++;
                }
            }

            var where = $"{unit}:{exec.LineOf(start + shift)}";
            var text = Specifiers(word.ToString(), name, where, problems);
            if (!quoted && Plain().Match(text) is { Success: true } plain)
            {
                // $VAR alone: the value split at whitespace, possibly into several words.
                foreach (var part in variables.GetValueOrDefault(plain.Groups["name"].Value, string.Empty).Split(' ', StringSplitOptions.RemoveEmptyEntries))
                {
                    words.Add((part, where));
                }

                continue;
            }

            words.Add((Braced().Replace(text, m => variables.GetValueOrDefault(m.Groups["name"].Value, string.Empty)), where));
        }

        return words;
    }

    private static string Specifiers(string text, string unit, string where, List<string> problems)
    {
        var result = new StringBuilder();
        for (var k = 0; k < text.Length; k++)
        {
            if (text[k] != '%' || k + 1 >= text.Length)
            {
                result.Append(text[k]);
                continue;
            }

            var specifier = text[++k];
            result.Append(specifier switch
            {
                '%' => "%",
                'i' or 'I' => InstanceSample,
                'H' or 'l' => "host1",
                'n' => unit.Replace("@.", $"@{InstanceSample}.", StringComparison.Ordinal),
                'p' or 'P' => unit[..unit.IndexOfAny(['@', '.'])],
                'd' => $"/run/credentials/{unit}",
                _ => null,
            } ?? Unknown(specifier, where, problems));
        }

        return result.ToString();
    }

    private static string Unknown(char specifier, string where, List<string> problems)
    {
        problems.Add($"{where}: the deploy test does not know the specifier %{specifier}");
        return string.Empty;
    }

    /// <summary>KEY=value lines, and the commented-out alternatives (#KEY=value) of an environment file.</summary>
    private static (Dictionary<string, string> Values, Dictionary<string, string> Commented) EnvironmentFile(string[] lines)
    {
        var values = new Dictionary<string, string>(StringComparer.Ordinal);
        var commented = new Dictionary<string, string>(StringComparer.Ordinal);
        foreach (var line in lines.Select(l => l.Trim()))
        {
            if (Assignment().Match(line) is { Success: true } match)
            {
                (match.Groups["comment"].Success ? commented : values)[match.Groups["key"].Value] = match.Groups["value"].Value;
            }
        }

        return (values, commented);
    }

    /// <summary>Settings by section; values continued with a trailing backslash are joined (comment lines between skipped).</summary>
    private static List<Setting> Parse(string[] lines)
    {
        var settings = new List<Setting>();
        var section = string.Empty;
        for (var k = 0; k < lines.Length; k++)
        {
            var line = lines[k].Trim();
            if (line.Length == 0 || line[0] is '#' or ';')
            {
                continue;
            }

            if (line.StartsWith('[') && line.EndsWith(']'))
            {
                section = line[1..^1];
                continue;
            }

            var first = k;
            var equals = line.IndexOf('=', StringComparison.Ordinal);
            var key = equals > 0 ? line[..equals].Trim() : line;
            var value = new StringBuilder(equals > 0 ? line[(equals + 1)..].Trim() : string.Empty);
            var joins = new List<int>();
            while (value.Length > 0 && value[^1] == '\\' && k + 1 < lines.Length)
            {
                value.Length--;
                value.Append(' ');
                var next = lines[++k].Trim();
                while (next.StartsWith('#') && k + 1 < lines.Length)
                {
                    next = lines[++k].Trim();
                }

                joins.Add(value.Length);
                value.Append(next);
            }

            settings.Add(new Setting(section, key, value.ToString(), first + 1, joins));
        }

        return settings;
    }

    [GeneratedRegex(@"(?<!\$)\$(?:\{(?<braced>[A-Za-z_][A-Za-z0-9_]*)\}|(?<plain>[A-Za-z_][A-Za-z0-9_]*))")]
    private static partial Regex Variable();

    [GeneratedRegex(@"^\$(?<name>[A-Za-z_][A-Za-z0-9_]*)$")]
    private static partial Regex Plain();

    [GeneratedRegex(@"\$\{(?<name>[A-Za-z_][A-Za-z0-9_]*)\}")]
    private static partial Regex Braced();

    [GeneratedRegex(@"^(?<comment>#)?(?<key>[A-Z_][A-Z0-9_]*)=(?<value>.*)$")]
    private static partial Regex Assignment();
}
