using System.CommandLine;
using System.Globalization;
using System.Text.RegularExpressions;
using FiberWorkers.Cli.Commands;
using FiberWorkers.Cli.Examples;
using FiberWorkers.Cluster.Hosting;
using FiberWorkers.Cluster.Stores;

namespace FiberWorkers.Cli.Tests.Deploy;

/// <summary>One <c>fiber</c> command line found in a deploy file, after its variables were filled in.</summary>
internal sealed record FiberInvocation(string Where, string Command, IReadOnlyDictionary<string, string> Values, IReadOnlyList<string> Arguments)
{
    /// <summary>Where each option's value was written (file:line).</summary>
    public Dictionary<string, string> Locations { get; } = new(StringComparer.Ordinal);

    public string? this[string option] => Values.GetValueOrDefault(option);

    /// <summary>The file and line of an option's value, or of the command when the option is absent.</summary>
    public string WhereOf(string option) => Locations.GetValueOrDefault(option) ?? Where;

    public ListenAddress? Listen => this["--listen"] is { } text && TryListen(text, out var address) ? address : null;

    public Uri? Url(string option) => this[option] is { } text && Uri.TryCreate(text, UriKind.Absolute, out var uri) ? uri : null;

    private static bool TryListen(string text, out ListenAddress? address)
    {
        try
        {
            address = ListenAddress.Parse(text, "--listen");
            return true;
        }
        catch (FormatException)
        {
            address = null;
            return false;
        }
    }
}

/// <summary>
/// Checks a <c>fiber</c> command line against the real command tree (<see cref="CommandLine.Build"/>): the
/// subcommand exists, every option exists on it, the parser accepts the line, and the values the commands validate
/// only when they run (listen addresses, URLs, store specs, numeric ranges, tile counts, example names) are valid.
/// Adds the rules of a deployment: servers listen on a fixed, non-loopback port; a worker that binds every interface
/// advertises the same port; no connection string in an argument list.
/// </summary>
internal sealed partial class FiberCommandCheck
{
    /// <summary>The commands deploy/ runs.</summary>
    public static readonly string[] Deployed = ["serve coordinator", "serve worker", "sweep", "ask"];

    private const string ServeSource = "src/FiberWorkers.Cli/Commands/ServeCommand.cs";
    private const string ServeLimitsSource = "src/FiberWorkers.Cli/Commands/ServeLimits.cs";
    private const string SweepSource = "src/FiberWorkers.Cli/Commands/SweepCommand.cs";

    private readonly RootCommand _root = CommandLine.Build(TextWriter.Null, TextWriter.Null);
    private readonly Dictionary<string, (double Low, double High)> _serveRanges;
    private readonly Dictionary<string, (double Low, double High)> _sweepRanges;

    public FiberCommandCheck(DeployFiles files, List<string> problems)
    {
        _serveRanges = Ranges(files, ServeSource, problems);

        // The request-limit options of both servers are validated in their own file.
        foreach (var (option, range) in Ranges(files, ServeLimitsSource, problems))
        {
            _serveRanges[option] = range;
        }
        _sweepRanges = Ranges(files, SweepSource, problems);

        // Every numeric option of a server must have a range this check can read, or a value outside it would pass here
        // and fail only when the server starts.
        foreach (var name in new[] { "serve coordinator", "serve worker" })
        {
            if (Find(name) is not { } server)
            {
                problems.Add($"{ServeSource}:1: 'fiber {name}' no longer exists; deploy/ runs it");
                continue;
            }

            foreach (var option in server.Options)
            {
                if (Numeric(option.ValueType) && !_serveRanges.ContainsKey(option.Name))
                {
                    problems.Add($"{ServeSource}:1: 'fiber {name} {option.Name}' is numeric but validated in no Range(...)/Seconds(...) call the deploy test reads; teach FiberCommandCheck its range");
                }
            }
        }
    }

    /// <summary>The subcommand named by words such as "serve worker", or null.</summary>
    public Command? Find(string path)
    {
        Command command = _root;
        foreach (var word in path.Split(' '))
        {
            var next = command.Subcommands.FirstOrDefault(c => c.Name == word);
            if (next is null)
            {
                return null;
            }

            command = next;
        }

        return command;
    }

    /// <summary>
    /// Checks <paramref name="words"/> (the words after the executable, each with the file:line it was written on).
    /// <paramref name="environment"/> holds the variables the process will have (for <c>--store postgres:env:VARIABLE</c>).
    /// </summary>
    public FiberInvocation? Check(IReadOnlyList<(string Text, string Where)> words, string where, IReadOnlySet<string> environment, List<string> problems)
    {
        var args = words.Select(w => w.Text).ToList();
        var path = new List<Command> { _root };
        var index = 0;
        while (index < args.Count && path[^1].Subcommands.FirstOrDefault(c => c.Name == args[index]) is { } sub)
        {
            path.Add(sub);
            index++;
        }

        var name = string.Join(' ', path.Skip(1).Select(c => c.Name));
        if (path.Count == 1 || path[^1].Subcommands.Count > 0)
        {
            problems.Add($"{where}: 'fiber {string.Join(' ', args.Take(2))}' is not a fiber command (commands: {string.Join(", ", Leaves(_root, string.Empty))})");
            return null;
        }

        var command = path[^1];
        var options = command.Options.Concat(path.SkipLast(1).SelectMany(c => c.Options.Where(o => o.Recursive))).ToList();
        var values = new Dictionary<string, string>(StringComparer.Ordinal);
        var locations = new Dictionary<string, string>(StringComparer.Ordinal);
        var arguments = new List<string>();
        for (; index < args.Count; index++)
        {
            var word = args[index];
            if (!word.StartsWith('-') || word.Length == 1 || double.TryParse(word, NumberStyles.Float, CultureInfo.InvariantCulture, out _))
            {
                arguments.Add(word);
                continue;
            }

            var equals = word.IndexOf('=', StringComparison.Ordinal);
            var optionName = equals > 0 ? word[..equals] : word;
            var option = options.FirstOrDefault(o => o.Name == optionName || o.Aliases.Contains(optionName));
            if (option is null)
            {
                problems.Add($"{words[index].Where}: {optionName} is not an option of 'fiber {name}' (its options: {string.Join(' ', command.Options.Select(o => o.Name))})");
                continue;
            }

            string value;
            var at = words[index].Where;
            if (equals > 0)
            {
                value = word[(equals + 1)..];
            }
            else if (option.Arity.MaximumNumberOfValues == 0 || (option.ValueType == typeof(bool) && (index + 1 >= args.Count || args[index + 1] is not ("true" or "false"))))
            {
                value = "true";
            }
            else if (index + 1 < args.Count)
            {
                value = args[++index];
                at = words[index].Where;
            }
            else
            {
                problems.Add($"{at}: {optionName} of 'fiber {name}' has no value");
                continue;
            }

            if (!values.TryAdd(option.Name, value))
            {
                problems.Add($"{at}: {option.Name} is given twice");
            }

            locations[option.Name] = at;
        }

        var parse = _root.Parse([.. args]);
        foreach (var error in parse.Errors)
        {
            problems.Add($"{where}: fiber's parser rejects 'fiber {name} ...': {error.Message}");
        }

        var invocation = new FiberInvocation(where, name, values, arguments);
        foreach (var (option, at) in locations)
        {
            invocation.Locations[option] = at;
        }

        switch (name)
        {
            case "serve coordinator":
                CheckServer(invocation, problems);
                CheckServerSecurity(invocation, environment, problems);
                CheckStore(invocation, environment, problems);
                break;
            case "serve worker":
                CheckServer(invocation, problems);
                CheckServerSecurity(invocation, environment, problems);
                CheckWorker(invocation, problems);
                break;
            case "sweep":
                CheckSweep(invocation, problems);
                CheckClientSecurity(invocation, environment, problems);
                break;
            case "ask":
                CheckAsk(invocation, problems);
                CheckClientSecurity(invocation, environment, problems);
                break;
        }

        return invocation;
    }

    private void CheckServer(FiberInvocation invocation, List<string> problems)
    {
        var where = invocation.WhereOf("--listen");
        if (invocation["--listen"] is not { } listen)
        {
            problems.Add($"{where}: 'fiber {invocation.Command}' without --listen binds only the loopback interface; give --listen HOST:PORT");
        }
        else
        {
            try
            {
                var address = ListenAddress.Parse(listen, "--listen");
                if (address.IsLoopback)
                {
                    problems.Add($"{where}: --listen {listen} is reachable only from the same host");
                }

                if (address.Port == 0)
                {
                    problems.Add($"{where}: --listen {listen} picks a random port, which no probe, Service or --advertise can name");
                }
            }
            catch (FormatException e)
            {
                problems.Add($"{where}: {e.Message}");
            }
        }

        foreach (var (option, value) in invocation.Values)
        {
            if (_serveRanges.TryGetValue(option, out var range))
            {
                CheckRange(invocation, option, value, range, ServeSource, problems);
            }
        }
    }

    private static void CheckStore(FiberInvocation invocation, IReadOnlySet<string> environment, List<string> problems)
    {
        var where = invocation.WhereOf("--store");
        var spec = invocation["--store"];
        if (spec is null)
        {
            return; // the parser has reported it: --store is required
        }

        // The forms LedgerStores.Open accepts (it opens the store at once, so the test cannot call it on a spec alone).
        if (spec.StartsWith("sqlite:", StringComparison.OrdinalIgnoreCase))
        {
            if (spec.Length == "sqlite:".Length)
            {
                problems.Add($"{where}: --store sqlite: names no file");
            }
        }
        else if (spec.StartsWith("postgres:env:", StringComparison.OrdinalIgnoreCase))
        {
            var variable = spec["postgres:env:".Length..];
            if (!EnvironmentName().IsMatch(variable))
            {
                problems.Add($"{where}: --store {spec}: '{variable}' is not an environment variable name");
            }
            else if (!environment.Contains(variable))
            {
                problems.Add($"{where}: --store {spec} reads {variable}, which this file does not put in the coordinator's environment");
            }
        }
        else if (spec.StartsWith("postgres:", StringComparison.OrdinalIgnoreCase))
        {
            problems.Add($"{where}: --store postgres:CONNECTION-STRING puts the connection string (and its password) in the argument list; use postgres:env:VARIABLE");
        }
        else
        {
            problems.Add($"{where}: --store '{spec}' is not one of {LedgerStores.Forms}");
        }
    }

    private static void CheckWorker(FiberInvocation invocation, List<string> problems)
    {
        var where = invocation.WhereOf("--advertise");
        Url(invocation, "--coordinator", problems);
        var advertise = Url(invocation, "--advertise", problems);
        if (invocation.Listen is not { } listen)
        {
            return;
        }

        if (listen.IsAny && invocation["--advertise"] is null)
        {
            problems.Add($"{invocation.WhereOf("--listen")}: --listen {listen} binds every interface, so fiber requires --advertise http://HOST:{listen.Port}");
        }

        if (advertise is not null && listen.Port != 0 && advertise.Port != listen.Port)
        {
            problems.Add($"{where}: --advertise {advertise} names port {advertise.Port}, but the worker listens on {listen.Port}");
        }
    }

    private void CheckSweep(FiberInvocation invocation, List<string> problems)
    {
        var where = invocation.Where;
        var example = invocation["--example"];
        if ((example is null) == (invocation.Arguments.Count == 0) || invocation.Arguments.Count > 1)
        {
            problems.Add($"{where}: 'fiber sweep' takes exactly one of a FAMILY file and --example NAME");
        }

        if (invocation["--atlas"] is not null || invocation["--coordinator"] is null)
        {
            problems.Add($"{where}: a cluster sweep gives --coordinator URL and no --atlas (the coordinator's store keeps the atlas)");
        }

        Url(invocation, "--coordinator", problems);
        var parameters = -1;
        if (example is not null)
        {
            if (!ExampleCatalog.Names.Contains(example))
            {
                problems.Add($"{invocation.WhereOf("--example")}: --example {example} is not a bundled example ({string.Join(", ", ExampleCatalog.Names)})");
            }
            else
            {
                parameters = ExampleCatalog.Load(example).Parameters.Count;
            }
        }

        foreach (var (option, value) in invocation.Values)
        {
            if (_sweepRanges.TryGetValue(option, out var range))
            {
                CheckRange(invocation, option, value, range, SweepSource, problems);
            }
        }

        if (invocation["--tiles"] is { } tiles && parameters > 0)
        {
            try
            {
                SweepCommand.Divisions(tiles, parameters, 4, null);
            }
            catch (UsageException e)
            {
                problems.Add($"{invocation.WhereOf("--tiles")}: {e.Message}");
            }
        }
    }

    private static void CheckAsk(FiberInvocation invocation, List<string> problems)
    {
        if (invocation["--coordinator"] is null || invocation["--atlas"] is null || invocation["--at"] is null || invocation.Arguments.Count > 0)
        {
            problems.Add($"{invocation.Where}: a cluster ask gives --coordinator URL --atlas ATLAS_ID --at P=..., and no atlas FILE");
        }

        Url(invocation, "--coordinator", problems);
    }

    private static Uri? Url(FiberInvocation invocation, string option, List<string> problems)
    {
        if (invocation[option] is not { } text)
        {
            return null;
        }

        try
        {
            return ServeCommand.Url(text, option);
        }
        catch (UsageException e)
        {
            problems.Add($"{invocation.WhereOf(option)}: {e.Message}");
            return null;
        }
    }

    private static void CheckRange(FiberInvocation invocation, string option, string value, (double Low, double High) range, string source, List<string> problems)
    {
        if (!double.TryParse(value, NumberStyles.Float, CultureInfo.InvariantCulture, out var number))
        {
            return; // the parser has reported a value that is not a number
        }

        if (number < range.Low || number > range.High)
        {
            problems.Add(string.Create(CultureInfo.InvariantCulture, $"{invocation.WhereOf(option)}: {option} {value} is outside [{range.Low}, {range.High}], the range {source} accepts"));
        }
    }

    /// <summary>The ranges a command file checks with <c>Range(parse.GetValue(x), low, high, "--option")</c> or <c>Seconds(...)</c>.</summary>
    private static Dictionary<string, (double Low, double High)> Ranges(DeployFiles files, string source, List<string> problems)
    {
        var ranges = new Dictionary<string, (double Low, double High)>(StringComparer.Ordinal);
        var text = File.ReadAllText(files.Source(source));
        foreach (Match match in RangeCall().Matches(text))
        {
            var option = match.Groups["option"].Value;
            var range = (Number(match.Groups["low"].Value), Number(match.Groups["high"].Value));
            if (ranges.TryGetValue(option, out var known) && known != range)
            {
                problems.Add($"{source}:1: {option} is checked against two ranges ({known.Low}..{known.High} and {range.Item1}..{range.Item2}); the deploy test cannot tell which command has which");
            }

            ranges[option] = range;
        }

        if (ranges.Count == 0)
        {
            problems.Add($"{source}:1: no Range(parse.GetValue(..), low, high, \"--option\") calls found; the deploy test reads the numeric limits from them");
        }

        return ranges;
    }

    private static double Number(string text) => double.Parse(text.Replace("_", string.Empty, StringComparison.Ordinal), CultureInfo.InvariantCulture);

    private static bool Numeric(Type type) => type == typeof(int) || type == typeof(long) || type == typeof(double) || type == typeof(int?) || type == typeof(long?) || type == typeof(double?);

    private static IEnumerable<string> Leaves(Command command, string prefix) =>
        command.Subcommands.Count == 0
            ? [prefix.Trim()]
            : command.Subcommands.SelectMany(c => Leaves(c, $"{prefix} {c.Name}"));

    [GeneratedRegex(@"(?:Range|Seconds)\(parse\.GetValue\(\w+\),\s*(?<low>[0-9_.]+),\s*(?<high>[0-9_.]+),\s*""(?<option>--[a-z-]+)""\)")]
    private static partial Regex RangeCall();

    [GeneratedRegex("^[A-Za-z_][A-Za-z0-9_]*$")]
    private static partial Regex EnvironmentName();
}
