using System.Text.RegularExpressions;

namespace FiberWorkers.Cli.Tests.Deploy;

/// <summary>Runs every check of deploy/ on one set of files; each problem reads "file:line: what is wrong".</summary>
internal static partial class DeployChecks
{
    private const string HostSource = "src/FiberWorkers.Cluster/Hosting/GrpcHost.cs";

    public static List<string> Kubernetes(DeployFiles files) => Run(files, (fiber, shutdown, problems) => problems.AddRange(KubernetesChecks.Run(files, fiber, shutdown).Problems));

    public static List<string> Slurm(DeployFiles files) => Run(files, (fiber, _, problems) => problems.AddRange(SlurmChecks.Run(files, fiber)));

    public static List<string> Systemd(DeployFiles files) => Run(files, (fiber, shutdown, problems) => problems.AddRange(SystemdChecks.Run(files, fiber, shutdown)));

    public static List<string> Image(DeployFiles files) =>
        Run(files, (fiber, shutdown, problems) => problems.AddRange(ImageChecks.Run(files, KubernetesChecks.Run(files, fiber, shutdown).ContainerPorts)));

    public static List<string> Readmes(DeployFiles files) => Run(files, (fiber, _, problems) => problems.AddRange(ReadmeChecks.Run(files, fiber)));

    /// <summary>Every file in deploy/ is one that some check reads; a new kind of file needs a check first.</summary>
    public static List<string> Coverage(DeployFiles files)
    {
        var problems = new List<string>();
        foreach (var file in files.All())
        {
            var known = (file.StartsWith("deploy/kubernetes/", StringComparison.Ordinal) && file.EndsWith(".yaml", StringComparison.Ordinal))
                || file is "deploy/docker/Dockerfile" or "deploy/docker/Dockerfile.dockerignore"
                || (file.StartsWith("deploy/slurm/", StringComparison.Ordinal) && file.EndsWith(".sbatch", StringComparison.Ordinal))
                || (file.StartsWith("deploy/systemd/", StringComparison.Ordinal) && (file.EndsWith(".service", StringComparison.Ordinal) || file.EndsWith(".example", StringComparison.Ordinal)))
                || file.EndsWith("/README.md", StringComparison.Ordinal);
            if (!known)
            {
                problems.Add($"{file}:1: no deploy check reads this kind of file; add one to tests/FiberWorkers.Cli.Tests/Deploy");
            }
        }

        return problems;
    }

    /// <summary>The servers' shutdown timeout (the default DrainTimeout of HostSettings in GrpcHost, which sets HostOptions.ShutdownTimeout), which grace periods must exceed.</summary>
    public static int ShutdownSeconds(DeployFiles files, List<string> problems)
    {
        var match = ShutdownTimeout().Match(File.ReadAllText(files.Source(HostSource)));
        if (!match.Success)
        {
            problems.Add($"{HostSource}:1: no 'DrainTimeout {{ get; init; }} = TimeSpan.FromSeconds(N)' found; the deploy test reads the servers' shutdown timeout from it");
            return 0;
        }

        return int.Parse(match.Groups["seconds"].Value, System.Globalization.CultureInfo.InvariantCulture);
    }

    private static List<string> Run(DeployFiles files, Action<FiberCommandCheck, int, List<string>> check)
    {
        var problems = new List<string>();
        var fiber = new FiberCommandCheck(files, problems);
        var shutdown = ShutdownSeconds(files, problems);
        check(fiber, shutdown, problems);
        return [.. problems.Distinct()];
    }

    [GeneratedRegex(@"DrainTimeout\s*\{\s*get;\s*init;\s*\}\s*=\s*TimeSpan\.FromSeconds\((?<seconds>\d+)\)")]
    private static partial Regex ShutdownTimeout();
}
