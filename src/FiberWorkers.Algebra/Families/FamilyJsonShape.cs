using System.Globalization;
using System.Text.Json;

namespace FiberWorkers.Algebra.Families;

/// <summary>
/// Checks the JSON structure of a family file before it is handed to the proto3 JSON parser, so that a
/// wrong type, a missing or misspelt field, a duplicate key or a non-finite number is reported with its
/// field path instead of as a parser exception.
/// </summary>
internal static class FamilyJsonShape
{
    private static readonly string[] TopLevelFields =
        ["family", "description", "unknowns", "parameters", "constants", "equations", "rootCount"];

    private static readonly string[] ParameterFields = ["name", "low", "high"];

    public static void Check(JsonElement root, string source, List<InputProblem> problems)
    {
        if (root.ValueKind != JsonValueKind.Object)
        {
            problems.Add(new InputProblem(source, string.Empty, $"expected a JSON object at the top level, found {Describe(root)}"));
            return;
        }

        var seen = CheckFields(root, string.Empty, TopLevelFields, ["root_count"], source, problems);
        foreach (var required in new[] { "family", "unknowns", "equations" })
        {
            if (!seen.Contains(required))
            {
                problems.Add(new InputProblem(source, string.Empty, $"missing field '{required}'"));
            }
        }

        foreach (var property in root.EnumerateObject())
        {
            var value = property.Value;
            switch (property.Name)
            {
                case "family":
                    if (RequireKind(value, JsonValueKind.String, "family", "a string", source, problems)
                        && string.IsNullOrWhiteSpace(value.GetString()))
                    {
                        problems.Add(new InputProblem(source, "family", "the family name is empty"));
                    }

                    break;
                case "description":
                    RequireKind(value, JsonValueKind.String, "description", "a string", source, problems);
                    break;
                case "unknowns":
                    CheckStringArray(value, "unknowns", "unknown", source, problems);
                    break;
                case "equations":
                    CheckStringArray(value, "equations", "equation", source, problems);
                    break;
                case "parameters":
                    CheckParameters(value, source, problems);
                    break;
                case "constants":
                    CheckConstants(value, source, problems);
                    break;
                case "rootCount" or "root_count":
                    CheckRootCount(value, property.Name, source, problems);
                    break;
            }
        }
    }

    /// <summary>
    /// Reports every \u escape that encodes half of a UTF-16 surrogate pair (\ud800 without its low half, or a low
    /// half alone), at its line and character column. The JSON reader accepts such escapes, but no string can hold
    /// them as text and reading one throws; so this runs on the (already valid) JSON text before any string is read.
    /// </summary>
    public static void CheckSurrogateEscapes(string text, string source, List<InputProblem> problems)
    {
        var line = 1;
        var lineStart = 0;
        var inString = false;
        for (var i = 0; i < text.Length; i++)
        {
            var c = text[i];
            if (c == '\n')
            {
                line++;
                lineStart = i + 1;
            }
            else if (c == '"')
            {
                inString = !inString;
            }
            else if (inString && c == '\\')
            {
                // Valid JSON: an escape is followed by one character, or by u and four hex digits.
                if (text[i + 1] != 'u')
                {
                    i++;
                    continue;
                }

                var unit = (char)int.Parse(text.AsSpan(i + 2, 4), NumberStyles.AllowHexSpecifier, CultureInfo.InvariantCulture);
                if (char.IsHighSurrogate(unit) && i + 11 < text.Length && text[i + 6] == '\\' && text[i + 7] == 'u'
                    && char.IsLowSurrogate((char)int.Parse(text.AsSpan(i + 8, 4), NumberStyles.AllowHexSpecifier, CultureInfo.InvariantCulture)))
                {
                    i += 11;
                    continue;
                }

                if (char.IsSurrogate(unit))
                {
                    problems.Add(new InputProblem(
                        source,
                        string.Create(CultureInfo.InvariantCulture, $"line {line}, column {i - lineStart + 1}"),
                        $"the escape {text.AsSpan(i, 6)} is half of a UTF-16 surrogate pair; strings must be valid Unicode"));
                }

                i += 5;
            }
        }
    }

    private static HashSet<string> CheckFields(
        JsonElement element, string path, string[] known, string[] aliases, string source, List<InputProblem> problems)
    {
        var seen = new HashSet<string>(StringComparer.Ordinal);
        foreach (var property in element.EnumerateObject())
        {
            var name = property.Name;
            var canonical = Array.IndexOf(aliases, name) >= 0 ? known[^1] : name;
            if (!seen.Add(canonical))
            {
                problems.Add(new InputProblem(source, Join(path, name), $"duplicate field '{name}'"));
            }

            if (Array.IndexOf(known, name) < 0 && Array.IndexOf(aliases, name) < 0)
            {
                var where = path.Length == 0 ? "a family" : path;
                problems.Add(new InputProblem(
                    source,
                    Join(path, name),
                    $"unknown field '{name}' in {where}{NameSuggester.Hint(name, known)}; known fields: {string.Join(", ", known)}"));
            }
        }

        return seen;
    }

    private static void CheckStringArray(JsonElement value, string field, string itemName, string source, List<InputProblem> problems)
    {
        if (!RequireKind(value, JsonValueKind.Array, field, "an array of strings", source, problems))
        {
            return;
        }

        if (value.GetArrayLength() == 0)
        {
            problems.Add(new InputProblem(source, field, $"'{field}' is empty; a family needs at least one {itemName}"));
        }

        var index = 0;
        foreach (var item in value.EnumerateArray())
        {
            index++;
            var location = $"{itemName} {index}";
            if (RequireKind(item, JsonValueKind.String, location, "a string", source, problems)
                && string.IsNullOrWhiteSpace(item.GetString()))
            {
                problems.Add(new InputProblem(source, location, $"the {itemName} is empty"));
            }
        }
    }

    private static void CheckParameters(JsonElement value, string source, List<InputProblem> problems)
    {
        if (!RequireKind(value, JsonValueKind.Array, "parameters", "an array of objects", source, problems))
        {
            return;
        }

        var index = 0;
        foreach (var item in value.EnumerateArray())
        {
            var path = $"parameters[{index++}]";
            if (!RequireKind(item, JsonValueKind.Object, path, "an object with name, low and high", source, problems))
            {
                continue;
            }

            var seen = CheckFields(item, path, ParameterFields, [], source, problems);
            foreach (var required in ParameterFields)
            {
                if (!seen.Contains(required))
                {
                    problems.Add(new InputProblem(source, path, $"missing field '{required}'"));
                }
            }

            foreach (var property in item.EnumerateObject())
            {
                var location = Join(path, property.Name);
                if (property.Name == "name")
                {
                    if (RequireKind(property.Value, JsonValueKind.String, location, "a string", source, problems)
                        && string.IsNullOrWhiteSpace(property.Value.GetString()))
                    {
                        problems.Add(new InputProblem(source, location, "the parameter name is empty"));
                    }
                }
                else if (property.Name is "low" or "high")
                {
                    CheckFiniteNumber(property.Value, location, source, problems);
                }
            }
        }
    }

    private static void CheckConstants(JsonElement value, string source, List<InputProblem> problems)
    {
        if (!RequireKind(value, JsonValueKind.Object, "constants", "an object of name: number", source, problems))
        {
            return;
        }

        var seen = new HashSet<string>(StringComparer.Ordinal);
        foreach (var property in value.EnumerateObject())
        {
            var location = $"constants.{property.Name}";
            if (!seen.Add(property.Name))
            {
                problems.Add(new InputProblem(source, location, $"duplicate constant '{property.Name}'"));
            }

            CheckFiniteNumber(property.Value, location, source, problems);
        }
    }

    private static void CheckRootCount(JsonElement value, string field, string source, List<InputProblem> problems)
    {
        if (!RequireKind(value, JsonValueKind.Number, field, "a positive integer", source, problems))
        {
            return;
        }

        if (!value.TryGetInt32(out var count) || count <= 0)
        {
            problems.Add(new InputProblem(source, field, $"expected a positive integer, found {value.GetRawText()}"));
        }
    }

    private static void CheckFiniteNumber(JsonElement value, string location, string source, List<InputProblem> problems)
    {
        if (value.ValueKind == JsonValueKind.String
            && value.GetString() is "NaN" or "Infinity" or "-Infinity")
        {
            problems.Add(new InputProblem(source, location, $"NaN or infinite numbers are not allowed, found \"{value.GetString()}\""));
            return;
        }

        if (!RequireKind(value, JsonValueKind.Number, location, "a number", source, problems))
        {
            return;
        }

        if (!value.TryGetDouble(out var number) || !double.IsFinite(number))
        {
            problems.Add(new InputProblem(source, location, $"the number {value.GetRawText()} is not finite in double precision"));
        }
    }

    private static bool RequireKind(
        JsonElement value, JsonValueKind kind, string location, string expected, string source, List<InputProblem> problems)
    {
        if (value.ValueKind == kind)
        {
            return true;
        }

        problems.Add(new InputProblem(source, location, $"expected {expected}, found {Describe(value)}"));
        return false;
    }

    private static string Describe(JsonElement value) => value.ValueKind switch
    {
        JsonValueKind.Object => "an object",
        JsonValueKind.Array => "an array",
        JsonValueKind.String => string.Create(CultureInfo.InvariantCulture, $"the string {value.GetRawText()}"),
        JsonValueKind.Number => $"the number {value.GetRawText()}",
        JsonValueKind.True or JsonValueKind.False => $"the boolean {value.GetRawText()}",
        JsonValueKind.Null => "null",
        _ => "nothing",
    };

    private static string Join(string path, string name) => path.Length == 0 ? name : $"{path}.{name}";
}
