using System.Text.RegularExpressions;
using FiberWorkers.Cli.Output;

namespace FiberWorkers.Cli.Tests.Deploy;

/// <summary>
/// Checks the READMEs under deploy/: every <c>fiber …</c> line in their code blocks against the command tree, every
/// deploy/ path and relative link they mention exists, and deploy/README.md carries the CLI's caution line.
/// </summary>
internal static partial class ReadmeChecks
{
    public static List<string> Run(DeployFiles files, FiberCommandCheck fiber)
    {
        var problems = new List<string>();
        var readmes = files.All().Where(f => f.EndsWith("/README.md", StringComparison.Ordinal)).ToList();
        if (!readmes.Contains("deploy/README.md"))
        {
            problems.Add("deploy/README.md:1: the file is missing");
        }
        else if (!File.ReadAllText(files.Full("deploy/README.md")).Contains(FiberOutput.Caution, StringComparison.Ordinal))
        {
            problems.Add($"deploy/README.md:1: the caution line is missing; quote it as the CLI prints it: \"{FiberOutput.Caution}\"");
        }

        foreach (var readme in readmes)
        {
            var lines = files.Lines(readme);
            var inCode = false;
            var code = new List<(int Line, string Text)>();
            for (var k = 0; k < lines.Length; k++)
            {
                if (lines[k].TrimStart().StartsWith("```", StringComparison.Ordinal))
                {
                    inCode = !inCode;
                    continue;
                }

                if (inCode)
                {
                    code.Add((k + 1, lines[k]));
                }

                foreach (Match link in Link().Matches(lines[k]))
                {
                    var target = link.Groups["target"].Value.Split('#')[0];
                    var resolved = Path.GetFullPath(Path.Combine(Path.GetDirectoryName(files.Full(readme))!, target));
                    var inRepository = Path.GetRelativePath(files.DeployRoot, resolved).Replace(Path.DirectorySeparatorChar, '/');
                    var exists = inRepository.StartsWith("deploy/", StringComparison.Ordinal)
                        ? File.Exists(resolved) || Directory.Exists(resolved)
                        : File.Exists(files.Source(inRepository)) || Directory.Exists(files.Source(inRepository));
                    if (!exists)
                    {
                        problems.Add($"{readme}:{k + 1}: the link to {target} leads nowhere");
                    }
                }
            }

            foreach (var (number, text) in code)
            {
                foreach (Match path in DeployPath().Matches(text))
                {
                    if (!File.Exists(files.Full(path.Value)) && !Directory.Exists(files.Full(path.Value)))
                    {
                        problems.Add($"{readme}:{number}: {path.Value} does not exist");
                    }
                }
            }

            // fiber command lines, continued with backslashes like a shell would.
            var codeLines = code.Select(c => c.Text).ToList();
            var k2 = 0;
            foreach (var line in ShellWords.LogicalLines(codeLines))
            {
                var number = code[k2].Line;
                k2 += line.Joins.Count + 1;
                var words = ShellWords.Split(line.Text, _ => null);
                if (words.Count < 2 || words[0].Text != "fiber")
                {
                    continue;
                }

                var args = words.Skip(1).TakeWhile(w => !w.IsOperator).Select(w => (w.Text, $"{readme}:{number + line.Joins.Count(j => j <= w.Start)}")).ToList();
                fiber.Check(args, $"{readme}:{number}", new HashSet<string>(["FIBER_POSTGRES"], StringComparer.Ordinal), problems);
            }
        }

        return problems;
    }

    [GeneratedRegex(@"(?<![\w/.-])deploy/[\w./@-]*[\w@-]")]
    private static partial Regex DeployPath();

    [GeneratedRegex(@"\]\((?<target>(?!https?:|mailto:|#)[^)\s]+)\)")]
    private static partial Regex Link();
}
