using System.Globalization;
using FiberWorkers.Algebra.Families;

namespace FiberWorkers.Cli.Commands;

/// <summary>Parses <c>--at NAME=VALUE,NAME=VALUE</c> against a family's parameters.</summary>
internal static class ParameterPoint
{
    /// <summary>
    /// The values in the family's parameter order. Every parameter must be given exactly once, each value a
    /// finite number; problems name the option and the offending item.
    /// </summary>
    public static double[] Parse(string? text, FamilyDefinition family, string option = "--at")
    {
        ArgumentNullException.ThrowIfNull(family);
        var names = family.Parameters.Select(p => p.Name).ToArray();
        var values = new double?[names.Length];
        var problems = new List<InputProblem>();
        var mentioned = new HashSet<string>(StringComparer.Ordinal);
        if (!string.IsNullOrWhiteSpace(text))
        {
            var items = text.Split(',', StringSplitOptions.TrimEntries);
            for (var i = 0; i < items.Length; i++)
            {
                var item = items[i];
                var location = $"item {i + 1} '{Shorten(item)}'";
                var equals = item.IndexOf('=', StringComparison.Ordinal);
                if (equals <= 0)
                {
                    problems.Add(new InputProblem(option, location, "expected NAME=VALUE"));
                    continue;
                }

                var name = item[..equals].Trim();
                var valueText = item[(equals + 1)..].Trim();
                var index = Array.IndexOf(names, name);
                if (index < 0)
                {
                    var hint = NameSuggester.Hint(name, names);
                    problems.Add(new InputProblem(
                        option,
                        location,
                        names.Length == 0 ? "this family has no parameters"
                            : $"'{Shorten(name)}' is not a parameter of this family{hint}; parameters: {string.Join(", ", names)}"));
                    continue;
                }

                mentioned.Add(name);
                if (values[index] is not null)
                {
                    problems.Add(new InputProblem(option, location, $"parameter '{name}' is given twice"));
                    continue;
                }

                if (!double.TryParse(valueText, NumberStyles.Float, CultureInfo.InvariantCulture, out var value))
                {
                    problems.Add(new InputProblem(option, location, $"'{Shorten(valueText)}' is not a number"));
                    continue;
                }

                if (!double.IsFinite(value))
                {
                    problems.Add(new InputProblem(option, location, "NaN or infinite values are not allowed"));
                    continue;
                }

                values[index] = value;
            }
        }

        for (var k = 0; k < names.Length; k++)
        {
            if (values[k] is null && !mentioned.Contains(names[k]))
            {
                problems.Add(new InputProblem(option, string.Empty, $"missing a value for parameter '{names[k]}'"));
            }
        }

        if (problems.Count > 0)
        {
            throw new InputException(problems);
        }

        return [.. values.Select(v => v!.Value)];
    }

    /// <summary>"P2 = 0.3, P3 = -0.1".</summary>
    public static string Format(FamilyDefinition family, ReadOnlySpan<double> values)
    {
        var parts = new string[values.Length];
        for (var k = 0; k < values.Length; k++)
        {
            parts[k] = string.Create(CultureInfo.InvariantCulture, $"{family.Parameters[k].Name} = {values[k]:R}");
        }

        return parts.Length == 0 ? "(no parameters)" : string.Join(", ", parts);
    }

    private static string Shorten(string text) => text.Length <= 30 ? text : string.Concat(text.AsSpan(0, 27), "...");
}
