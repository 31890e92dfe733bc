using System.Globalization;
using System.Numerics;
using System.Text;
using System.Text.Json;
using System.Text.RegularExpressions;
using FiberWorkers.Algebra.Families;
using FiberWorkers.Algebra.Polynomials;
using FiberWorkers.Fuzz.Tests.Engine;
using FiberWorkers.Solving.Randomness;

namespace FiberWorkers.Fuzz.Tests.Families;

/// <summary>
/// The property every family file must satisfy: reading it either gives a valid family — square, finite box and
/// constants, finite coefficients, within the limits, that compiles and evaluates at a random complex point to the
/// same values (and derivatives) as term-by-term evaluation — or fails with an <see cref="InputException"/> whose
/// every problem names the source and a location the text supports (a line and column inside the file, a byte
/// inside it, an equation that exists and a column inside its text, a field). Anything else is a finding.
/// </summary>
internal static partial class FamilyProperty
{
    /// <summary>The source name the fuzz inputs are read under.</summary>
    public const string Source = "fuzz.family.json";

    // Problems without a location: about the file as a whole.
    private static readonly string[] WholeFileMessages =
    [
        "missing field '", "expected a JSON object at the top level", "the family has ", "not a family: ", "invalid JSON: ",
    ];

    /// <summary>Reads <paramref name="bytes"/> and checks the outcome; returns the outcome label or throws.</summary>
    public static string Check(byte[] bytes) => Check(bytes, Source, FamilyLimits.Default);

    public static string Check(byte[] bytes, string source, FamilyLimits limits)
    {
        FamilyDefinition family;
        try
        {
            family = FamilyReader.Parse(bytes, source, limits);
        }
        catch (InputException e)
        {
            return CheckProblems(e, bytes, source);
        }

        CheckFamily(family, limits);
        CheckEvaluation(family, new SeededRandom(SeededRandom.Derive(0x5EED, family.ContentHash)));
        return "valid";
    }

    private static string CheckProblems(InputException error, byte[] bytes, string source)
    {
        if (error.Problems.Count == 0)
        {
            throw new FuzzViolation("an input error without problems");
        }

        if (error.GetType() != typeof(InputException))
        {
            throw new FuzzViolation($"an input error of the derived type {error.GetType().Name}");
        }

        // Parsed only when a problem points into an equation: most inputs never need it, and some are huge.
        var equations = new Lazy<List<List<string>>>(() => EquationTexts(bytes));
        foreach (var problem in error.Problems)
        {
            if (problem.Source != source)
            {
                throw new FuzzViolation($"a problem names the source '{problem.Source}', not '{source}': {problem}");
            }

            if (string.IsNullOrWhiteSpace(problem.Message) || problem.Message.Contains("   at ", StringComparison.Ordinal))
            {
                throw new FuzzViolation($"a problem without a message, or with a stack trace: {problem}");
            }

            CheckLocation(problem, bytes, equations);
        }

        return "invalid: " + Kind(error.Problems[0]);
    }

    private static void CheckLocation(InputProblem problem, byte[] bytes, Lazy<List<List<string>>> lazyEquations)
    {
        var location = problem.Location;
        if (IsFieldNameProblem(problem))
        {
            return;
        }

        if (location.Length == 0)
        {
            if (!WholeFileMessages.Any(m => problem.Message.StartsWith(m, StringComparison.Ordinal)))
            {
                throw new FuzzViolation($"a problem without a location: {problem}");
            }

            return;
        }

        if (LineColumnPattern().Match(location) is { Success: true } lineColumn)
        {
            var line = int.Parse(lineColumn.Groups[1].Value, CultureInfo.InvariantCulture);
            var column = long.Parse(lineColumn.Groups[2].Value, CultureInfo.InvariantCulture);
            var lines = Text(bytes)?.Split('\n');
            if (lines is null || line < 1 || line > lines.Length || column < 1 || column > lines[line - 1].Length + 1)
            {
                throw new FuzzViolation($"line {line} (of {lines?.Length}) or column {column} is outside the file: {problem}");
            }

            return;
        }

        if (BytePattern().Match(location) is { Success: true } byteLocation)
        {
            var offset = long.Parse(byteLocation.Groups[1].Value, CultureInfo.InvariantCulture);
            if (offset < 1 || offset > bytes.Length)
            {
                throw new FuzzViolation($"byte {offset} is outside the {bytes.Length}-byte file: {problem}");
            }

            return;
        }

        if (EquationPattern().Match(location) is { Success: true } equation)
        {
            // With duplicate "equations" keys every array is checked, so the number may refer to any of them.
            var equations = lazyEquations.Value;
            var number = int.Parse(equation.Groups[1].Value, CultureInfo.InvariantCulture);
            var candidates = equations.Where(list => number >= 1 && number <= list.Count).ToList();
            if (candidates.Count == 0)
            {
                throw new FuzzViolation(
                    $"equation {number} does not exist (the file has {string.Join(" or ", equations.Select(l => l.Count))} equations): {problem}");
            }

            if (equation.Groups[2].Success)
            {
                var column = int.Parse(equation.Groups[2].Value, CultureInfo.InvariantCulture);
                if (!candidates.Any(list => column >= 1 && column <= list[number - 1].Length + 1))
                {
                    throw new FuzzViolation(
                        $"column {column} is outside equation {number} ({candidates[0][number - 1].Length} characters): {problem}");
                }
            }

            return;
        }

        if (FieldPattern().IsMatch(location))
        {
            return;
        }

        throw new FuzzViolation($"a location the reader does not use: '{location}' in {problem}");
    }

    /// <summary>
    /// An unknown or duplicate field is located at its path: its own (arbitrary, possibly empty) name at the top
    /// level, parameters[k].name inside a parameter; the message quotes the name.
    /// </summary>
    private static bool IsFieldNameProblem(InputProblem problem)
    {
        var location = problem.Location;
        var name = ParameterPathPattern().Match(location) is { Success: true } inParameter ? inParameter.Groups[1].Value : location;
        return problem.Message.StartsWith($"unknown field '{name}' in ", StringComparison.Ordinal)
            || problem.Message == $"duplicate field '{name}'";
    }

    private static void CheckFamily(FamilyDefinition family, FamilyLimits limits)
    {
        var system = family.System;
        if (system.UnknownCount == 0 || !system.IsSquare || system.UnknownCount > limits.MaxUnknowns)
        {
            throw new FuzzViolation($"a valid family with {system.UnknownCount} unknowns and {system.Equations.Count} equations");
        }

        if (system.ParameterCount != family.Parameters.Count || family.Parameters.Count > limits.MaxParameters)
        {
            throw new FuzzViolation($"{family.Parameters.Count} parameters in the box, {system.ParameterCount} in the system");
        }

        foreach (var name in system.Unknowns.Concat(system.Parameters).Concat(family.Constants.Keys))
        {
            if (!FamilyReader.IsIdentifier(name) || name.Length > limits.MaxNameLength)
            {
                throw new FuzzViolation($"a valid family with the name '{name}'");
            }
        }

        foreach (var box in family.Parameters)
        {
            if (!double.IsFinite(box.Low) || !double.IsFinite(box.High) || !(box.Low < box.High))
            {
                throw new FuzzViolation($"a valid family with the box [{box.Low}, {box.High}] for '{box.Name}'");
            }
        }

        foreach (var (name, value) in family.Constants)
        {
            if (!double.IsFinite(value))
            {
                throw new FuzzViolation($"a valid family with the constant {name} = {value}");
            }
        }

        for (var i = 0; i < system.Equations.Count; i++)
        {
            var equation = system.Equations[i];
            if (equation.IsZero || !equation.DependsOn(0, system.UnknownCount))
            {
                throw new FuzzViolation($"equation {i + 1} of a valid family is zero or free of unknowns");
            }

            if (equation.TermCount > limits.MaxTerms
                || equation.Degree(0, system.UnknownCount) > limits.MaxDegree
                || equation.Degree(system.UnknownCount, system.ParameterCount) > limits.MaxDegree)
            {
                throw new FuzzViolation($"equation {i + 1} of a valid family exceeds a limit");
            }

            for (var t = 0; t < equation.TermCount; t++)
            {
                if (!double.IsFinite(equation.CoefficientOf(t)) || equation.CoefficientOf(t) == 0)
                {
                    throw new FuzzViolation($"equation {i + 1} of a valid family has the coefficient {equation.CoefficientOf(t)}");
                }
            }
        }

        if (family.ContentHash.Length != 64)
        {
            throw new FuzzViolation($"the content hash '{family.ContentHash}' is not 64 hex digits");
        }
    }

    /// <summary>
    /// Compiles the system and evaluates F, ∂F/∂x and ∂F/∂p at a random point (x in the unit polydisc, p in the
    /// box with a small imaginary part), against term-by-term evaluation of F and of the exact partial derivatives.
    /// Agreement is required to 1e-9 of the sum of the terms' magnitudes (the rounding either way is far smaller).
    /// </summary>
    private static void CheckEvaluation(FamilyDefinition family, SeededRandom random)
    {
        var system = family.System;
        var n = system.UnknownCount;
        var m = system.ParameterCount;
        var compiled = system.Compile();
        var workspace = compiled.CreateWorkspace();
        var x = new Complex[n];
        var p = new Complex[m];
        for (var j = 0; j < n; j++)
        {
            x[j] = Complex.FromPolarCoordinates(random.NextDouble(), 2 * Math.PI * random.NextDouble());
        }

        for (var k = 0; k < m; k++)
        {
            var box = family.Parameters[k];
            p[k] = new Complex(random.NextDouble(box.Low, box.High), 0.1 * random.NextGaussian());
        }

        var values = new Complex[n];
        var jacobian = new Complex[n * n];
        var parameterJacobian = new Complex[n * m];
        compiled.Evaluate(x, p, values, jacobian, parameterJacobian, workspace);
        Complex[] point = [.. x, .. p];
        var derivativeChecks = 0;
        for (var i = 0; i < n; i++)
        {
            var equation = system.Equations[i];
            Compare(values[i], equation, point, $"f{i + 1}");
            for (var v = 0; v < n + m && derivativeChecks < 48; v++)
            {
                // Derivatives are checked for the first equations' variables only: enough to catch a wrong program.
                derivativeChecks++;
                var compiledEntry = v < n ? jacobian[(i * n) + v] : parameterJacobian[(i * m) + v - n];
                Compare(compiledEntry, equation.Derivative(v), point, $"d f{i + 1} / d variable {v + 1}");
            }
        }
    }

    private static void Compare(Complex compiled, Polynomial reference, Complex[] point, string what)
    {
        var expected = reference.Evaluate(point);
        var scale = 0.0;
        for (var t = 0; t < reference.TermCount; t++)
        {
            var magnitude = Math.Abs(reference.CoefficientOf(t));
            var exponents = reference.ExponentsOf(t);
            for (var v = 0; v < exponents.Length; v++)
            {
                magnitude *= Math.Pow(point[v].Magnitude, exponents[v]);
            }

            scale += magnitude;
        }

        if (!double.IsFinite(scale))
        {
            return;
        }

        var difference = (compiled - expected).Magnitude;
        if (!(difference <= (1e-9 * scale) + 1e-300))
        {
            throw new FuzzViolation($"compiled {what} = {compiled} but term-by-term {expected} (scale {scale:G3})");
        }
    }

    /// <summary>The file as text the way the reader decodes it (without a leading byte-order mark), or null if it is not UTF-8.</summary>
    private static string? Text(byte[] bytes)
    {
        var span = bytes.AsSpan();
        if (span.StartsWith("\uFEFF"u8))
        {
            span = span[3..];
        }

        try
        {
            return new UTF8Encoding(false, true).GetString(span);
        }
        catch (DecoderFallbackException)
        {
            return null;
        }
    }

    /// <summary>Every "equations" array of a file that is JSON with an object at the top (non-strings as ""), else none.</summary>
    private static List<List<string>> EquationTexts(byte[] bytes)
    {
        var arrays = new List<List<string>>();
        try
        {
            if (Text(bytes) is not { } text)
            {
                return arrays;
            }

            using var document = JsonDocument.Parse(text, new JsonDocumentOptions { MaxDepth = 64 });
            if (document.RootElement.ValueKind != JsonValueKind.Object)
            {
                return arrays;
            }

            foreach (var property in document.RootElement.EnumerateObject())
            {
                if (property.Name == "equations" && property.Value.ValueKind == JsonValueKind.Array)
                {
                    arrays.Add([.. property.Value.EnumerateArray().Select(e => e.ValueKind == JsonValueKind.String ? e.GetString() ?? string.Empty : string.Empty)]);
                }
            }
        }
        catch (Exception e) when (e is JsonException or InvalidOperationException)
        {
            arrays.Clear();
        }

        return arrays;
    }

    private static readonly string[] Fields = ["family", "description", "unknowns", "parameters", "constants", "equations", "rootCount", "root_count"];

    /// <summary>A coarse label for the first problem's place, so the report shows which checks the inputs reached.</summary>
    private static string Kind(InputProblem problem)
    {
        var location = problem.Location;
        return IsFieldNameProblem(problem) ? "field name"
            : location.Length == 0 ? "file"
            : location.StartsWith("line ", StringComparison.Ordinal) ? "JSON"
            : location.StartsWith("byte ", StringComparison.Ordinal) ? "UTF-8"
            : location.StartsWith("equation ", StringComparison.Ordinal) && location.Contains("column", StringComparison.Ordinal) ? "equation text"
            : location.StartsWith("equation ", StringComparison.Ordinal) ? "equation"
            : location.StartsWith("unknown ", StringComparison.Ordinal) ? "unknown"
            : Array.IndexOf(Fields, location.Split('.', '[')[0]) >= 0 ? location.Split('.', '[')[0]
            : "other";
    }

    [GeneratedRegex(@"^parameters\[[0-9]+\]\.(.*)$", RegexOptions.Singleline)]
    private static partial Regex ParameterPathPattern();

    [GeneratedRegex("^line ([0-9]+), column ([0-9]+)$")]
    private static partial Regex LineColumnPattern();

    [GeneratedRegex("^byte ([0-9]+)$")]
    private static partial Regex BytePattern();

    [GeneratedRegex("^equation ([0-9]+)(?:, column ([0-9]+))?$")]
    private static partial Regex EquationPattern();

    [GeneratedRegex(@"^(family|description|unknowns|equations|parameters|constants|rootCount|root_count|unknown [0-9]+|parameters\[[0-9]+\](\.(name|low|high))?|constants\..*)$", RegexOptions.Singleline)]
    private static partial Regex FieldPattern();
}
