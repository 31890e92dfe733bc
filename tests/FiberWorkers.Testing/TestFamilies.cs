using System.Globalization;
using System.Text;
using System.Text.Json;
using FiberWorkers.Algebra.Families;

namespace FiberWorkers.Testing;

/// <summary>
/// Families used across test projects: the bundled examples and generators of well-known benchmark
/// systems. Each generator writes a family file in our own format and reads it back, so the tests also
/// exercise the reader.
/// </summary>
public static class TestFamilies
{
    /// <summary>Names of the bundled examples.</summary>
    public static IReadOnlyList<string> ExampleNames { get; } =
    [
        .. typeof(TestFamilies).Assembly.GetManifestResourceNames()
            .Where(n => n.StartsWith("examples/", StringComparison.Ordinal))
            .Select(n => n["examples/".Length..^".json".Length])
            .Order(StringComparer.Ordinal),
    ];

    /// <summary>A bundled example, read through the family reader.</summary>
    public static FamilyDefinition Example(string name)
    {
        using var stream = typeof(TestFamilies).Assembly.GetManifestResourceStream($"examples/{name}.json")
            ?? throw new ArgumentException($"no example {name}", nameof(name));
        using var memory = new MemoryStream();
        stream.CopyTo(memory);
        return FamilyReader.Parse(memory.ToArray(), $"{name}.json");
    }

    /// <summary>Family JSON from its parts (parameters as name → (low, high)).</summary>
    public static string Json(
        string name,
        IReadOnlyList<string> unknowns,
        IReadOnlyList<string> equations,
        IReadOnlyList<(string Name, double Low, double High)>? parameters = null,
        IReadOnlyDictionary<string, double>? constants = null,
        int? rootCount = null)
    {
        using var buffer = new MemoryStream();
        using (var writer = new Utf8JsonWriter(buffer))
        {
            writer.WriteStartObject();
            writer.WriteString("family", name);
            writer.WriteStartArray("unknowns");
            foreach (var u in unknowns)
            {
                writer.WriteStringValue(u);
            }

            writer.WriteEndArray();
            writer.WriteStartArray("parameters");
            foreach (var (pName, low, high) in parameters ?? [])
            {
                writer.WriteStartObject();
                writer.WriteString("name", pName);
                writer.WriteNumber("low", low);
                writer.WriteNumber("high", high);
                writer.WriteEndObject();
            }

            writer.WriteEndArray();
            writer.WriteStartObject("constants");
            foreach (var (cName, value) in constants ?? new Dictionary<string, double>())
            {
                writer.WriteNumber(cName, value);
            }

            writer.WriteEndObject();
            writer.WriteStartArray("equations");
            foreach (var e in equations)
            {
                writer.WriteStringValue(e);
            }

            writer.WriteEndArray();
            if (rootCount is { } count)
            {
                writer.WriteNumber("rootCount", count);
            }

            writer.WriteEndObject();
        }

        return Encoding.UTF8.GetString(buffer.ToArray());
    }

    /// <summary>Reads a family from its parts.</summary>
    public static FamilyDefinition Build(
        string name,
        IReadOnlyList<string> unknowns,
        IReadOnlyList<string> equations,
        IReadOnlyList<(string Name, double Low, double High)>? parameters = null,
        IReadOnlyDictionary<string, double>? constants = null,
        int? rootCount = null) =>
        FamilyReader.Parse(Json(name, unknowns, equations, parameters, constants, rootCount), $"{name}.json");

    /// <summary>Katsura-n (Katsura 1990): 2ⁿ finite nonsingular solutions; see <see cref="BenchmarkFamilies.Katsura"/>.</summary>
    public static FamilyDefinition Katsura(int n) => BenchmarkFamilies.Katsura(n);

    /// <summary>Cyclic-n roots (Björck &amp; Fröberg 1991); see <see cref="BenchmarkFamilies.Cyclic"/>.</summary>
    public static FamilyDefinition Cyclic(int n, bool withConstantParameters = false) => BenchmarkFamilies.Cyclic(n, withConstantParameters);

    /// <summary>
    /// Lossless power flow on a complete network of <paramref name="buses"/> buses, unit voltage magnitudes,
    /// bus 1 the reference, injections P2..Pn as parameters; line susceptances from <paramref name="susceptance"/>.
    /// </summary>
    public static FamilyDefinition CompleteMicrogrid(int buses, Func<int, int, double> susceptance, double box = 1.5)
    {
        ArgumentOutOfRangeException.ThrowIfLessThan(buses, 2);
        var unknowns = new List<string>();
        for (var i = 2; i <= buses; i++)
        {
            unknowns.Add($"c{i}");
            unknowns.Add($"s{i}");
        }

        string B(int i, int j) => susceptance(Math.Min(i, j), Math.Max(i, j)).ToString("R", CultureInfo.InvariantCulture);
        var equations = new List<string>();
        for (var i = 2; i <= buses; i++)
        {
            var terms = new List<string> { $"{B(1, i)}*s{i}" };
            for (var j = 2; j <= buses; j++)
            {
                if (j != i)
                {
                    terms.Add($"{B(i, j)}*(s{i}*c{j} - c{i}*s{j})");
                }
            }

            equations.Add($"{string.Join(" + ", terms)} - P{i}");
        }

        for (var i = 2; i <= buses; i++)
        {
            equations.Add($"c{i}^2 + s{i}^2 - 1");
        }

        var parameters = Enumerable.Range(2, buses - 1).Select(i => ($"P{i}", -box, box)).ToArray();
        return Build($"microgrid-{buses}", unknowns, equations, parameters);
    }
}
