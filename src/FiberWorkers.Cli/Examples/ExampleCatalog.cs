using FiberWorkers.Algebra.Families;

namespace FiberWorkers.Cli.Examples;

/// <summary>The example families bundled in the executable (scenarios of our own).</summary>
internal static class ExampleCatalog
{
    private const string Prefix = "examples/";

    /// <summary>Names of the bundled examples, sorted.</summary>
    public static IReadOnlyList<string> Names { get; } =
    [
        .. typeof(ExampleCatalog).Assembly.GetManifestResourceNames()
            .Where(n => n.StartsWith(Prefix, StringComparison.Ordinal) && n.EndsWith(".json", StringComparison.Ordinal))
            .Select(n => n[Prefix.Length..^".json".Length])
            .Order(StringComparer.Ordinal),
    ];

    /// <summary>The raw JSON of an example.</summary>
    public static byte[] Json(string name)
    {
        using var stream = typeof(ExampleCatalog).Assembly.GetManifestResourceStream($"{Prefix}{name}.json")
            ?? throw new InputException(
                "--example", string.Empty, $"no bundled example '{name}'{NameSuggester.Hint(name, Names)}; bundled: {string.Join(", ", Names)}");
        using var memory = new MemoryStream();
        stream.CopyTo(memory);
        return memory.ToArray();
    }

    /// <summary>Reads and validates a bundled example.</summary>
    public static FamilyDefinition Load(string name, FamilyLimits? limits = null) =>
        FamilyReader.Parse(Json(name), $"example '{name}'", limits);
}
