using System.Text.Json;
using System.Text.RegularExpressions;
using System.Xml.Linq;

namespace FiberWorkers.Cli.Tests.Deploy;

/// <summary>
/// Checks deploy/docker/Dockerfile against the repository: the SDK and runtime images match global.json and the
/// target framework, the project files copied before the restore are exactly the CLI's project references, every
/// copied path exists and is not excluded by the .dockerignore, the publish is Release for linux-x64, the final
/// stage runs as a non-root user, the entry point is the published executable, and EXPOSE covers the ports the
/// Kubernetes containers declare.
/// </summary>
internal static partial class ImageChecks
{
    private const string Dockerfile = "deploy/docker/Dockerfile";
    private const string Ignore = "deploy/docker/Dockerfile.dockerignore";
    private const string CliProject = "src/FiberWorkers.Cli/FiberWorkers.Cli.csproj";

    private sealed record Instruction(string Keyword, string Arguments, int Line);

    public static List<string> Run(DeployFiles files, IEnumerable<(string Where, int Port)> containerPorts)
    {
        var problems = new List<string>();
        var instructions = ShellWords.LogicalLines(files.Lines(Dockerfile))
            .Where(l => l.Text.Trim().Length > 0 && !l.Text.TrimStart().StartsWith('#'))
            .Select(Parse)
            .ToList();
        static string At(Instruction i) => $"{Dockerfile}:{i.Line}";
        var top = $"{Dockerfile}:1";

        var stages = instructions.Select((i, k) => (i, k)).Where(p => p.i.Keyword == "FROM").Select(p => p.k).ToList();
        if (stages.Count < 2)
        {
            problems.Add($"{top}: a multi-stage build needs a build stage and a runtime stage; found {stages.Count} FROM");
            return problems;
        }

        // Versions: global.json pins the SDK, Directory.Build.props the target framework.
        using var global = JsonDocument.Parse(File.ReadAllText(files.Source("global.json")));
        var sdkMajor = global.RootElement.GetProperty("sdk").GetProperty("version").GetString()!.Split('.')[0];
        var framework = XDocument.Load(files.Source("Directory.Build.props")).Descendants("TargetFramework").Single().Value;
        var first = instructions[stages[0]];
        var last = instructions[stages[^1]];
        if (!first.Arguments.StartsWith($"mcr.microsoft.com/dotnet/sdk:{sdkMajor}.0 ", StringComparison.Ordinal))
        {
            problems.Add($"{At(first)}: the build stage should be mcr.microsoft.com/dotnet/sdk:{sdkMajor}.0 (global.json pins SDK {sdkMajor}.x)");
        }

        if (!last.Arguments.StartsWith($"mcr.microsoft.com/dotnet/aspnet:{framework[3..]}", StringComparison.Ordinal))
        {
            problems.Add($"{At(last)}: the runtime stage should be mcr.microsoft.com/dotnet/aspnet:{framework[3..]} (the projects target {framework}; the servers need ASP.NET Core)");
        }

        // COPY sources exist and the project files before the restore are exactly the CLI's project closure.
        var ignored = files.Lines(Ignore).Select(l => l.Trim()).Where(l => l.Length > 0 && !l.StartsWith('#')).ToList();
        var copiedProjects = new HashSet<string>(StringComparer.Ordinal);
        foreach (var copy in instructions.Where(i => i.Keyword == "COPY" && !i.Arguments.StartsWith("--from", StringComparison.Ordinal)))
        {
            var paths = copy.Arguments.Split(' ', StringSplitOptions.RemoveEmptyEntries);
            foreach (var source in paths[..^1])
            {
                var path = source.TrimEnd('/');
                if (!File.Exists(files.Source(path)) && !Directory.Exists(files.Source(path)))
                {
                    problems.Add($"{At(copy)}: COPY {source}: no such file or folder in the repository (the build context)");
                }

                if (ignored.FirstOrDefault(p => Excludes(p, path)) is { } pattern)
                {
                    problems.Add($"{At(copy)}: COPY {source} is excluded by '{pattern}' in {Ignore}");
                }

                if (path.EndsWith(".csproj", StringComparison.Ordinal))
                {
                    copiedProjects.Add(path);
                }
            }
        }

        var restore = instructions.FirstOrDefault(i => i.Keyword == "RUN" && i.Arguments.Contains("dotnet restore", StringComparison.Ordinal));
        var restoreAt = restore is null ? top : At(restore);
        var closure = ProjectClosure(files, CliProject);
        foreach (var missing in closure.Except(copiedProjects))
        {
            problems.Add($"{restoreAt}: the restore layer does not COPY {missing}, which {CliProject} references");
        }

        foreach (var extra in copiedProjects.Except(closure))
        {
            problems.Add($"{restoreAt}: COPY {extra}, which {CliProject} does not reference");
        }

        foreach (var props in new[] { "global.json", "Directory.Build.props", "Directory.Packages.props" })
        {
            if (!instructions.Any(i => i.Keyword == "COPY" && i.Arguments.Split(' ').Contains(props)))
            {
                problems.Add($"{restoreAt}: does not COPY {props}, which shapes the build");
            }
        }

        // The publish, and the runtime stage's copy of it.
        var publish = instructions.FirstOrDefault(i => i.Keyword == "RUN" && i.Arguments.Contains("dotnet publish src/FiberWorkers.Cli", StringComparison.Ordinal));
        var output = publish is null ? null : Output().Match(publish.Arguments) is { Success: true } o ? o.Groups["dir"].Value : null;
        if (publish is null || !publish.Arguments.Contains("-c Release", StringComparison.Ordinal) || !publish.Arguments.Contains("-r linux-x64", StringComparison.Ordinal) || output is null)
        {
            problems.Add($"{(publish is null ? top : At(publish))}: the build stage should RUN dotnet publish src/FiberWorkers.Cli -c Release -r linux-x64 -o DIR");
        }

        var runtime = instructions.Skip(stages[^1]).ToList();
        var workdir = runtime.LastOrDefault(i => i.Keyword == "WORKDIR")?.Arguments ?? "/";
        var fromBuild = runtime.FirstOrDefault(i => i.Keyword == "COPY" && i.Arguments.StartsWith("--from=build ", StringComparison.Ordinal));
        var installed = fromBuild?.Arguments.Split(' ', StringSplitOptions.RemoveEmptyEntries) is [_, var from, var to] && from.TrimEnd('/') == output?.TrimEnd('/')
            ? Path.GetFullPath(to, workdir).TrimEnd('/')
            : null;
        if (installed is null)
        {
            problems.Add($"{(fromBuild is null ? top : At(fromBuild))}: the runtime stage should COPY --from=build {output ?? "DIR"} to its WORKDIR");
        }

        var assembly = XDocument.Load(files.Source(CliProject)).Descendants("AssemblyName").Single().Value;
        var entry = runtime.LastOrDefault(i => i.Keyword == "ENTRYPOINT");
        string[]? entryWords;
        try
        {
            entryWords = entry is null ? null : JsonSerializer.Deserialize<string[]>(entry.Arguments);
        }
        catch (JsonException)
        {
            entryWords = null; // the shell form: SIGTERM would reach /bin/sh, not fiber
        }

        if (entryWords is not [var executable, ..] || executable != $"{installed}/{assembly}")
        {
            problems.Add($"{(entry is null ? top : At(entry))}: ENTRYPOINT should be the exec form [\"{installed}/{assembly}\"], the published executable");
        }

        var user = runtime.LastOrDefault(i => i.Keyword == "USER");
        if (user is null || user.Arguments is "root" or "0" || user.Arguments.StartsWith("0:", StringComparison.Ordinal))
        {
            problems.Add($"{(user is null ? top : At(user))}: the runtime stage should end with a non-root USER (the base image's $APP_UID)");
        }

        var exposed = runtime.Where(i => i.Keyword == "EXPOSE").SelectMany(i => i.Arguments.Split(' ', StringSplitOptions.RemoveEmptyEntries)).Select(p => p.Split('/')[0]).ToHashSet();
        foreach (var (where, port) in containerPorts)
        {
            if (!exposed.Contains(port.ToString(System.Globalization.CultureInfo.InvariantCulture)))
            {
                problems.Add($"{where}: containerPort {port} is not EXPOSEd by {Dockerfile}");
            }
        }

        return [.. problems.Distinct()];
    }

    private static Instruction Parse(LogicalLine line)
    {
        var parts = line.Text.Trim().Split(' ', 2);
        return new Instruction(parts[0].ToUpperInvariant(), parts.Length > 1 ? parts[1].Trim() : string.Empty, line.Line);
    }

    /// <summary>A project and every project it references, transitively, as repository paths.</summary>
    private static HashSet<string> ProjectClosure(DeployFiles files, string project)
    {
        var closure = new HashSet<string>(StringComparer.Ordinal);
        var pending = new Stack<string>([project]);
        while (pending.TryPop(out var next))
        {
            if (!closure.Add(next))
            {
                continue;
            }

            var directory = Path.GetDirectoryName(next)!;
            foreach (var reference in XDocument.Load(files.Source(next)).Descendants("ProjectReference"))
            {
                var full = Path.GetFullPath(Path.Combine(files.Source(directory), reference.Attribute("Include")!.Value));
                pending.Push(Path.GetRelativePath(files.RepositoryRoot, full).Replace(Path.DirectorySeparatorChar, '/'));
            }
        }

        return closure;
    }

    /// <summary>Whether a .dockerignore pattern (the forms used: "**/bin/", ".git/", "*.db") excludes a path.</summary>
    private static bool Excludes(string pattern, string path)
    {
        var expression = "^" + Regex.Escape(pattern.TrimEnd('/'))
            .Replace(@"\*\*/", "(?:.*/)?", StringComparison.Ordinal)
            .Replace(@"\*", "[^/]*", StringComparison.Ordinal) + "(?:/.*)?$";
        return Regex.IsMatch(path, expression);
    }

    [GeneratedRegex(@"\s-o\s+(?<dir>\S+)")]
    private static partial Regex Output();
}
