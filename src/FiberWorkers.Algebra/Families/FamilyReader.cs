using System.Text;
using System.Text.Json;
using System.Text.RegularExpressions;
using FiberWorkers.Algebra.Parsing;
using FiberWorkers.Algebra.Polynomials;
using FiberWorkers.Contracts.V1;
using Google.Protobuf;

namespace FiberWorkers.Algebra.Families;

/// <summary>
/// Reads family files (the proto3 JSON form of <see cref="Family"/>) and validates them into
/// <see cref="FamilyDefinition"/>s. Every problem is an <see cref="InputException"/> naming the file and the
/// place (field, equation and column); as many problems as can be found are reported at once.
/// </summary>
public static partial class FamilyReader
{
    private const int MaxProblems = 25;

    /// <summary>Reads and validates a family file from disk.</summary>
    public static FamilyDefinition ReadFile(string path, FamilyLimits? limits = null)
    {
        ArgumentNullException.ThrowIfNull(path);
        limits ??= FamilyLimits.Default;
        var source = Path.GetFileName(path);
        byte[] bytes;
        try
        {
            var info = new FileInfo(path);
            if (!info.Exists)
            {
                throw new InputException(path, string.Empty, "no such file");
            }

            if (info.Length > limits.MaxFileBytes)
            {
                throw new InputException(
                    source, string.Empty, $"the file has {info.Length} bytes, above the limit of {limits.MaxFileBytes} bytes");
            }

            bytes = File.ReadAllBytes(path);
        }
        catch (Exception e) when (e is IOException or UnauthorizedAccessException)
        {
            throw new InputException(path, string.Empty, $"cannot read the file: {e.Message}");
        }

        return Parse(bytes, source, limits);
    }

    /// <summary>Parses and validates family JSON (UTF-8 bytes); <paramref name="source"/> names it in errors.</summary>
    public static FamilyDefinition Parse(ReadOnlySpan<byte> utf8Json, string source, FamilyLimits? limits = null)
    {
        ArgumentNullException.ThrowIfNull(source);
        limits ??= FamilyLimits.Default;
        if (utf8Json.Length > limits.MaxFileBytes)
        {
            throw new InputException(
                source, string.Empty, $"the family has {utf8Json.Length} bytes, above the limit of {limits.MaxFileBytes} bytes");
        }

        var skipped = 0;
        if (utf8Json.StartsWith("\uFEFF"u8))
        {
            utf8Json = utf8Json[3..];
            skipped = 3;
        }

        string text;
        try
        {
            text = new UTF8Encoding(false, true).GetString(utf8Json);
        }
        catch (DecoderFallbackException e)
        {
            throw new InputException(source, $"byte {skipped + e.Index + 1}", "the file is not valid UTF-8");
        }

        JsonDocument document;
        try
        {
            document = JsonDocument.Parse(text, new JsonDocumentOptions { MaxDepth = 16 });
        }
        catch (JsonException e)
        {
            var location = e.LineNumber is { } line
                ? $"line {line + 1}, column {CharacterColumn(text, line, e.BytePositionInLine ?? 0)}"
                : string.Empty;
            throw new InputException(source, location, $"invalid JSON: {StripJsonPosition(e.Message)}");
        }

        using (document)
        {
            var problems = new List<InputProblem>();
            FamilyJsonShape.CheckSurrogateEscapes(text, source, problems);
            ThrowIfAny(problems);
            FamilyJsonShape.Check(document.RootElement, source, problems);
            ThrowIfAny(problems);
        }

        Family message;
        try
        {
            message = new JsonParser(JsonParser.Settings.Default).Parse<Family>(text);
        }
        catch (InvalidProtocolBufferException e)
        {
            throw new InputException(source, string.Empty, $"not a family: {e.Message}");
        }
        catch (InvalidJsonException e)
        {
            throw new InputException(source, string.Empty, $"invalid JSON: {e.Message}");
        }

        return FromMessage(message, source, limits);
    }

    /// <summary>Parses and validates family JSON text.</summary>
    public static FamilyDefinition Parse(string json, string source, FamilyLimits? limits = null)
    {
        ArgumentNullException.ThrowIfNull(json);
        return Parse(Encoding.UTF8.GetBytes(json), source, limits);
    }

    /// <summary>Validates a family given as a proto message (for example from a gRPC request).</summary>
    public static FamilyDefinition FromMessage(Family message, string source, FamilyLimits? limits = null)
    {
        ArgumentNullException.ThrowIfNull(message);
        ArgumentNullException.ThrowIfNull(source);
        limits ??= FamilyLimits.Default;
        var problems = new List<InputProblem>();
        void Problem(string location, string text) => problems.Add(new InputProblem(source, location, text));

        if (string.IsNullOrWhiteSpace(message.Family_))
        {
            Problem("family", "the family name is empty");
        }

        if (message.Unknowns.Count == 0)
        {
            Problem("unknowns", "'unknowns' is empty; a family needs at least one unknown");
        }

        if (message.Unknowns.Count > limits.MaxUnknowns)
        {
            Problem("unknowns", $"{message.Unknowns.Count} unknowns, above the limit of {limits.MaxUnknowns}");
        }

        if (message.Parameters.Count > limits.MaxParameters)
        {
            Problem("parameters", $"{message.Parameters.Count} parameters, above the limit of {limits.MaxParameters}");
        }

        if (message.Constants.Count > limits.MaxConstants)
        {
            Problem("constants", $"{message.Constants.Count} constants, above the limit of {limits.MaxConstants}");
        }

        if (message.HasRootCount && message.RootCount <= 0)
        {
            Problem("rootCount", $"expected a positive integer, found {message.RootCount}");
        }

        ThrowIfAny(problems);

        // Names: valid identifiers, unique within and across unknowns, parameters and constants.
        var owner = new Dictionary<string, string>(StringComparer.Ordinal);
        var namesValid = true;
        void Name(string name, string kind, string location)
        {
            var before = problems.Count;
            CheckName(name, kind, location);
            namesValid &= problems.Count == before;
        }

        void CheckName(string name, string kind, string location)
        {
            if (!IsIdentifier(name))
            {
                Problem(location, $"'{Shorten(name)}' is not a valid name; names match [A-Za-z_][A-Za-z0-9_]*");
            }
            else if (name.Length > limits.MaxNameLength)
            {
                Problem(location, $"the name '{Shorten(name)}' has {name.Length} characters, above the limit of {limits.MaxNameLength}");
            }
            else if (owner.TryGetValue(name, out var previous))
            {
                var text = previous == kind
                    ? $"the {kind} name '{name}' is used twice"
                    : $"the name '{name}' is used as both {Article(previous)} and {Article(kind)}";
                Problem(location, text);
            }
            else
            {
                owner[name] = kind;
            }
        }

        for (var i = 0; i < message.Unknowns.Count; i++)
        {
            Name(message.Unknowns[i], "unknown", $"unknown {i + 1}");
        }

        var parameters = new List<ParameterBox>(message.Parameters.Count);
        for (var k = 0; k < message.Parameters.Count; k++)
        {
            var parameter = message.Parameters[k];
            var path = $"parameters[{k}]";
            Name(parameter.Name, "parameter", $"{path}.name");
            if (!double.IsFinite(parameter.Low))
            {
                Problem($"{path}.low", $"NaN or infinite numbers are not allowed, found {parameter.Low}");
            }

            if (!double.IsFinite(parameter.High))
            {
                Problem($"{path}.high", $"NaN or infinite numbers are not allowed, found {parameter.High}");
            }

            if (double.IsFinite(parameter.Low) && double.IsFinite(parameter.High) && !(parameter.Low < parameter.High))
            {
                Problem(path, $"low ({parameter.Low:R}) must be below high ({parameter.High:R}) for parameter '{parameter.Name}'");
            }

            parameters.Add(new ParameterBox(parameter.Name, parameter.Low, parameter.High));
        }

        var constants = new Dictionary<string, double>(StringComparer.Ordinal);
        var constantsFinite = true;
        foreach (var (name, value) in message.Constants)
        {
            Name(name, "constant", $"constants.{Shorten(name)}");
            if (!double.IsFinite(value))
            {
                Problem($"constants.{Shorten(name)}", $"NaN or infinite numbers are not allowed, found {value}");
                constantsFinite = false;
            }

            constants[name] = value;
        }

        if (message.Equations.Count != message.Unknowns.Count)
        {
            Problem(
                "equations",
                $"{Count(message.Equations.Count, "equation")} for {Count(message.Unknowns.Count, "unknown")}; "
                + "a family needs as many equations as unknowns");
        }

        // Box and count problems do not stop the equations from being checked; broken names do, and so do
        // non-finite constants (every equation using one would be reported again as overflowing).
        if (!namesValid || !constantsFinite)
        {
            ThrowIfAny(problems);
        }

        var unknowns = message.Unknowns.ToArray();
        var parameterNames = parameters.Select(p => p.Name).ToArray();
        var builder = new PolynomialBuilder(unknowns, parameterNames, constants, limits);
        var equations = new Polynomial[message.Equations.Count];
        for (var i = 0; i < message.Equations.Count; i++)
        {
            var location = $"equation {i + 1}";
            try
            {
                var tree = ExpressionParser.Parse(message.Equations[i], limits.MaxExpressionNodes, limits.MaxNestingDepth, limits.MaxDegree);
                var polynomial = builder.Build(tree);
                if (polynomial.IsZero)
                {
                    Problem(location, "the equation is identically zero");
                }
                else if (!polynomial.DependsOn(0, unknowns.Length))
                {
                    Problem(location, "the equation does not involve any unknown (degree 0 in the unknowns)");
                }
                else if (polynomial.TermCount > limits.MaxTerms)
                {
                    Problem(location, $"the equation expands to {polynomial.TermCount} terms, above the limit of {limits.MaxTerms}");
                }

                equations[i] = polynomial;
            }
            catch (ExpressionSyntaxException e)
            {
                Problem($"{location}, column {e.Column}", e.Message);
            }

            if (problems.Count >= MaxProblems || builder.WorkExhausted)
            {
                break;
            }
        }

        ThrowIfAny(problems);
        var system = new PolynomialSystem(unknowns, parameterNames, equations);
        return new FamilyDefinition(source, message.Clone(), parameters, constants, system);
    }

    /// <summary>True for names matching [A-Za-z_][A-Za-z0-9_]*.</summary>
    public static bool IsIdentifier(string name) => IdentifierPattern().IsMatch(name);

    [GeneratedRegex("^[A-Za-z_][A-Za-z0-9_]*$", RegexOptions.CultureInvariant)]
    private static partial Regex IdentifierPattern();

    private static void ThrowIfAny(List<InputProblem> problems)
    {
        if (problems.Count > 0)
        {
            throw new InputException(problems.Take(MaxProblems).ToArray());
        }
    }

    /// <summary>
    /// The 1-based column, in characters, of a position the JSON reader gives in UTF-8 bytes within a line
    /// (lines counted by '\n'), so that the column matches what an editor shows for non-ASCII text.
    /// </summary>
    private static long CharacterColumn(string text, long line, long bytesInLine)
    {
        var start = 0;
        for (var l = 0L; l < line; l++)
        {
            var next = text.IndexOf('\n', start);
            if (next < 0)
            {
                return bytesInLine + 1;
            }

            start = next + 1;
        }

        var index = start;
        for (var bytes = 0L; index < text.Length && bytes < bytesInLine; index++)
        {
            var c = text[index];
            if (char.IsHighSurrogate(c) && index + 1 < text.Length && char.IsLowSurrogate(text[index + 1]))
            {
                bytes += 4;
                index++;
            }
            else
            {
                bytes += c < 0x80 ? 1 : c < 0x800 ? 2 : 3;
            }
        }

        return index - start + 1;
    }

    private static string StripJsonPosition(string message)
    {
        var cut = message.IndexOf(" Path:", StringComparison.Ordinal);
        if (cut < 0)
        {
            cut = message.IndexOf(" LineNumber:", StringComparison.Ordinal);
        }

        return (cut >= 0 ? message[..cut] : message).Trim().TrimEnd('|').Trim();
    }

    private static string Count(int count, string noun) => count == 1 ? $"1 {noun}" : $"{count} {noun}s";

    private static string Article(string kind) => kind == "unknown" ? "an unknown" : $"a {kind}";

    private static string Shorten(string text) => text.Length <= 40 ? text : string.Concat(text.AsSpan(0, 37), "...");
}
