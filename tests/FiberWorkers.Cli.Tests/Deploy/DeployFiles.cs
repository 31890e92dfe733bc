namespace FiberWorkers.Cli.Tests.Deploy;

/// <summary>
/// Where the checks read from: the deploy/ folder (the repository's own, or a changed copy in a test that makes sure
/// a check fails) and the repository's sources (the CLI's command definitions and project files).
/// </summary>
internal sealed class DeployFiles
{
    private DeployFiles(string deployRoot, string repositoryRoot)
    {
        DeployRoot = deployRoot;
        RepositoryRoot = repositoryRoot;
    }

    /// <summary>The folder that holds deploy/.</summary>
    public string DeployRoot { get; }

    /// <summary>The repository: FiberWorkers.sln, src/, global.json.</summary>
    public string RepositoryRoot { get; }

    public static DeployFiles Repository { get; } = Locate();

    /// <summary>A copy of deploy/ under a fresh temporary folder, read instead of the repository's own.</summary>
    public DeployFiles CopyDeploy(string temporaryRoot)
    {
        var source = Path.Combine(DeployRoot, "deploy");
        foreach (var file in System.IO.Directory.EnumerateFiles(source, "*", SearchOption.AllDirectories))
        {
            var target = Path.Combine(temporaryRoot, "deploy", Path.GetRelativePath(source, file));
            System.IO.Directory.CreateDirectory(Path.GetDirectoryName(target)!);
            File.Copy(file, target);
        }

        return new DeployFiles(temporaryRoot, RepositoryRoot);
    }

    /// <summary>The absolute path of a deploy file given relative to the deploy root ("deploy/slurm/README.md").</summary>
    public string Full(string relative) => Path.Combine(DeployRoot, relative);

    /// <summary>The absolute path of a repository file ("src/FiberWorkers.Cli/Commands/ServeCommand.cs").</summary>
    public string Source(string relative) => Path.Combine(RepositoryRoot, relative);

    /// <summary>Every file under deploy/, as "deploy/…" with forward slashes, in a fixed order.</summary>
    public IReadOnlyList<string> All() =>
        [.. System.IO.Directory.EnumerateFiles(Full("deploy"), "*", SearchOption.AllDirectories)
            .Select(f => Path.GetRelativePath(DeployRoot, f).Replace(Path.DirectorySeparatorChar, '/'))
            .Order(StringComparer.Ordinal)];

    public string[] Lines(string relative) => File.ReadAllLines(Full(relative));

    private static DeployFiles Locate()
    {
        for (var directory = new DirectoryInfo(AppContext.BaseDirectory); directory is not null; directory = directory.Parent)
        {
            if (File.Exists(Path.Combine(directory.FullName, "FiberWorkers.sln")) && System.IO.Directory.Exists(Path.Combine(directory.FullName, "deploy")))
            {
                return new DeployFiles(directory.FullName, directory.FullName);
            }
        }

        throw new InvalidOperationException($"{AppContext.BaseDirectory} is not inside the FiberWorkers repository (no FiberWorkers.sln with deploy/ above it)");
    }
}
