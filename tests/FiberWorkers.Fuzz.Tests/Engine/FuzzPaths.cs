namespace FiberWorkers.Fuzz.Tests.Engine;

/// <summary>
/// Where the corpus lives: read from the source tree (found by walking up from the test binaries), so that a
/// file dropped into <c>Corpus/</c> is picked up without a rebuild and recorded expectations land beside it.
/// </summary>
internal static class FuzzPaths
{
    private static readonly Lazy<string> Project = new(FindProject);

    /// <summary>tests/FiberWorkers.Fuzz.Tests.</summary>
    public static string ProjectDirectory => Project.Value;

    /// <summary>Corpus/families: seed family files with their expected outcomes.</summary>
    public static string FamilyCorpus => Path.Combine(ProjectDirectory, "Corpus", "families");

    /// <summary>Corpus/regressions: inputs that once broke a reader or decoder, replayed on every run.</summary>
    public static string Regressions => Path.Combine(ProjectDirectory, "Corpus", "regressions");

    /// <summary>The bundled example families (ours), used as seeds as they are.</summary>
    public static string Examples => Path.GetFullPath(Path.Combine(ProjectDirectory, "..", "..", "src", "FiberWorkers.Cli", "Examples"));

    private static string FindProject()
    {
        for (var directory = new DirectoryInfo(AppContext.BaseDirectory); directory is not null; directory = directory.Parent)
        {
            if (File.Exists(Path.Combine(directory.FullName, "FiberWorkers.Fuzz.Tests.csproj")))
            {
                return directory.FullName;
            }

            var nested = Path.Combine(directory.FullName, "tests", "FiberWorkers.Fuzz.Tests");
            if (File.Exists(Path.Combine(nested, "FiberWorkers.Fuzz.Tests.csproj")))
            {
                return nested;
            }
        }

        throw new InvalidOperationException(
            $"cannot find tests/FiberWorkers.Fuzz.Tests (with its Corpus folder) above {AppContext.BaseDirectory}");
    }
}
