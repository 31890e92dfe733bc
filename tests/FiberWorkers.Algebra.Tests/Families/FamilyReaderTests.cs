using System.Numerics;
using System.Text;
using FiberWorkers.Algebra.Families;
using FiberWorkers.Algebra.Polynomials;
using FiberWorkers.Contracts.V1;
using FiberWorkers.Testing;

namespace FiberWorkers.Algebra.Tests.Families;

/// <summary>
/// The family reader: JSON shape, fields, names, the parameter box, numbers, limits, UTF-8 and file errors.
/// Every error test asserts both the message (or its distinctive part) and where it points.
/// </summary>
public sealed class FamilyReaderTests
{
    private const string Source = "family.json";

    // The example of issue 2, verbatim.
    private const string TwoBusLine = """
        {
          "family": "two-bus line",
          "description": "optional free text",
          "unknowns": ["c", "s"],
          "parameters": [ { "name": "P", "low": -3, "high": 3 } ],
          "constants": { "B": 1.7 },
          "equations": [ "c^2 + s^2 - 1", "B*s - P" ]
        }
        """;

    // ---------------------------------------------------------------- valid families

    [Fact]
    public void The_two_bus_line_of_the_issue_parses_with_degrees_2_1_and_Bezout_number_2()
    {
        var family = FamilyReader.Parse(TwoBusLine, Source);

        Assert.Equal("two-bus line", family.Name);
        Assert.Equal("optional free text", family.Description);
        Assert.Equal(Source, family.Source);
        Assert.Equal(["c", "s"], family.Unknowns);
        Assert.Equal([new ParameterBox("P", -3, 3)], family.Parameters);
        Assert.Equal(1.7, family.Constants["B"]);
        Assert.Equal(["c^2 + s^2 - 1", "B*s - P"], family.EquationTexts);
        Assert.Equal([2, 1], family.System.Degrees);
        Assert.Equal(new BigInteger(2), family.System.BezoutNumber);
        Assert.True(family.System.IsSquare);
        Assert.Equal(["P"], family.System.Parameters);
        Assert.Null(family.RootCount);
    }

    [Fact]
    public void The_two_bus_line_expands_to_the_written_polynomials_with_B_substituted()
    {
        var system = FamilyReader.Parse(TwoBusLine, Source).System;

        // Variables are c, s, P in that order; B = 1.7 is a number, not a variable.
        var circle = system.Equations[0];
        Assert.Equal(3, circle.VariableCount);
        Assert.Equal(3, circle.TermCount);
        Assert.Equal(1, Coefficient(circle, 2, 0, 0));
        Assert.Equal(1, Coefficient(circle, 0, 2, 0));
        Assert.Equal(-1, Coefficient(circle, 0, 0, 0));

        var line = system.Equations[1];
        Assert.Equal(2, line.TermCount);
        Assert.Equal(1.7, Coefficient(line, 0, 1, 0));
        Assert.Equal(-1, Coefficient(line, 0, 0, 1));

        // At c = 0.6, s = 0.8, P = 1: the circle holds and B*s - P = 1.36 - 1.
        Complex[] point = [0.6, 0.8, 1.0];
        Assert.Equal(0, circle.Evaluate(point).Magnitude, 14);
        Assert.Equal(0.36, line.Evaluate(point).Real, 14);
    }

    [Fact]
    public void The_bundled_two_bus_example_matches_the_issue_example()
    {
        var bundled = TestFamilies.Example("two-bus");
        var fromIssue = FamilyReader.Parse(TwoBusLine, Source);

        Assert.Equal(fromIssue.ContentHash, bundled.ContentHash);
        Assert.Equal([2, 1], bundled.System.Degrees);
    }

    [Fact]
    public void Optional_fields_may_be_left_out_and_parameters_may_be_empty()
    {
        var family = FamilyReader.Parse("""{ "family": "one root", "unknowns": ["x"], "equations": ["2*x - 1"] }""", Source);

        Assert.Empty(family.Parameters);
        Assert.Empty(family.Constants);
        Assert.Equal(string.Empty, family.Description);
        Assert.Equal(0, family.System.ParameterCount);
        Assert.Equal(2, Coefficient(family.System.Equations[0], 1));
        Assert.Equal(-1, Coefficient(family.System.Equations[0], 0));
    }

    [Fact]
    public void Constants_are_substituted_as_numbers_and_do_not_become_variables()
    {
        var family = TestFamilies.Build(
            "constants", ["x"], ["k*x^2 - 2*k*m + m/k"], [("p", 0, 1)], new Dictionary<string, double> { ["k"] = 4, ["m"] = 3 });
        var equation = family.System.Equations[0];

        Assert.Equal(2, equation.VariableCount);
        Assert.Equal(2, equation.TermCount);
        Assert.Equal(4, Coefficient(equation, 2, 0));
        Assert.Equal(-24 + 0.75, Coefficient(equation, 0, 0));
    }

    [Fact]
    public void The_root_count_hint_is_read_in_both_spellings()
    {
        var camel = FamilyReader.Parse("""{ "family": "f", "unknowns": ["x"], "equations": ["x^2 - 2"], "rootCount": 2 }""", Source);
        var snake = FamilyReader.Parse("""{ "family": "f", "unknowns": ["x"], "equations": ["x^2 - 2"], "root_count": 2 }""", Source);

        Assert.Equal(2, camel.RootCount);
        Assert.Equal(2, snake.RootCount);
    }

    [Fact]
    public void A_byte_order_mark_and_non_ascii_free_text_are_accepted()
    {
        var json = """{ "family": "µ-grid ∆", "description": "Übertragung – 1 kV", "unknowns": ["x"], "equations": ["x - 1"] }""";
        byte[] bytes = [0xEF, 0xBB, 0xBF, .. Encoding.UTF8.GetBytes(json)];

        var family = FamilyReader.Parse(bytes, Source);

        Assert.Equal("µ-grid ∆", family.Name);
        Assert.Equal("Übertragung – 1 kV", family.Description);
    }

    [Fact]
    public void ReadFile_reads_a_family_from_disk_and_names_errors_by_the_file_name()
    {
        var directory = Directory.CreateTempSubdirectory("fiberworkers-reader-");
        try
        {
            var good = Path.Combine(directory.FullName, "two-bus.json");
            File.WriteAllText(good, TwoBusLine);
            var bad = Path.Combine(directory.FullName, "broken.json");
            File.WriteAllText(bad, TestFamilies.Json("broken", ["x"], ["x - q"]));

            var family = FamilyReader.ReadFile(good);
            var error = Assert.Throws<InputException>(() => FamilyReader.ReadFile(bad));

            Assert.Equal("two-bus.json", family.Source);
            Assert.Equal([2, 1], family.System.Degrees);
            var problem = Assert.Single(error.Problems);
            Assert.Equal("broken.json", problem.Source);
            Assert.Equal("equation 1, column 5", problem.Location);
            Assert.Equal("unknown name 'q'", problem.Message);
        }
        finally
        {
            directory.Delete(recursive: true);
        }
    }

    [Fact]
    public void ReadFile_of_a_missing_file_is_an_input_error_naming_the_path()
    {
        var path = Path.Combine(Path.GetTempPath(), $"fiberworkers-missing-{Guid.NewGuid():N}", "nowhere.json");

        var error = Assert.Throws<InputException>(() => FamilyReader.ReadFile(path));

        var problem = Assert.Single(error.Problems);
        Assert.Equal(path, problem.Source);
        Assert.Equal(string.Empty, problem.Location);
        Assert.Equal("no such file", problem.Message);
        Assert.Equal($"{path}: no such file", error.Message);
    }

    [Fact]
    public void ReadFile_refuses_a_file_above_the_size_limit_before_reading_it()
    {
        var directory = Directory.CreateTempSubdirectory("fiberworkers-reader-");
        try
        {
            var path = Path.Combine(directory.FullName, "large.json");
            File.WriteAllText(path, TwoBusLine);
            var length = new FileInfo(path).Length;

            var error = Assert.Throws<InputException>(
                () => FamilyReader.ReadFile(path, new FamilyLimits { MaxFileBytes = (int)length - 1 }));
            var family = FamilyReader.ReadFile(path, new FamilyLimits { MaxFileBytes = (int)length });

            var problem = Assert.Single(error.Problems);
            Assert.Equal("large.json", problem.Source);
            Assert.Equal($"the file has {length} bytes, above the limit of {length - 1} bytes", problem.Message);
            Assert.Equal("two-bus line", family.Name);
        }
        finally
        {
            directory.Delete(recursive: true);
        }
    }

    // ---------------------------------------------------------------- message shape

    [Fact]
    public void Unknown_name_error_has_the_shape_of_the_issue_example()
    {
        var json = TestFamilies.Json(
            "rates", ["x", "y"], ["x - y", "k1*x^2 + y - k2"], constants: new Dictionary<string, double> { ["k1"] = 2 });

        var error = Assert.Throws<InputException>(() => FamilyReader.Parse(json, Source));

        Assert.Equal("family.json: equation 2, column 14: unknown name 'k2' (did you mean 'k1'?)", error.Message);
        var problem = Assert.Single(error.Problems);
        Assert.Equal(new InputProblem(Source, "equation 2, column 14", "unknown name 'k2' (did you mean 'k1'?)"), problem);
        Assert.Equal(error.Message, problem.ToString());
    }

    [Fact]
    public void Several_problems_are_reported_together_in_input_order()
    {
        var json = """
            {
              "family": "many mistakes",
              "unknowns": ["x", "y"],
              "parameters": [ { "name": "p", "low": 2, "high": 1 } ],
              "equations": [ "x - zz", "y^2.5", "x + y + p" ]
            }
            """;

        var error = Assert.Throws<InputException>(() => FamilyReader.Parse(json, Source));

        Assert.Collection(
            error.Problems,
            p => AssertProblem(p, "parameters[0]", "low (2) must be below high (1) for parameter 'p'"),
            p => AssertProblem(p, "equations", "3 equations for 2 unknowns"),
            p => AssertProblem(p, "equation 1, column 5", "unknown name 'zz'"),
            p => AssertProblem(p, "equation 2, column 3", "bad exponent"));
        Assert.Equal(
            string.Join(Environment.NewLine, error.Problems.Select(p => p.ToString())),
            error.Message);
        Assert.All(error.Problems, p => Assert.StartsWith("family.json: ", p.ToString(), StringComparison.Ordinal));
    }

    [Fact]
    public void Problems_in_several_fields_of_the_json_shape_are_reported_together()
    {
        var json = """{ "family": "", "unknowns": "x", "equation": ["x"] }""";

        var error = Assert.Throws<InputException>(() => FamilyReader.Parse(json, Source));

        Assert.Collection(
            error.Problems,
            p => AssertProblem(p, "equation", "unknown field 'equation' in a family (did you mean 'equations'?)"),
            p => AssertProblem(p, string.Empty, "missing field 'equations'"),
            p => AssertProblem(p, "family", "the family name is empty"),
            p => AssertProblem(p, "unknowns", "expected an array of strings, found the string \"x\""));
    }

    // ---------------------------------------------------------------- square system, names

    [Theory]
    [InlineData(new[] { "x + y" }, "1 equation for 2 unknowns; a family needs as many equations as unknowns")]
    [InlineData(new[] { "x + y", "x - y", "x*y - 1" }, "3 equations for 2 unknowns; a family needs as many equations as unknowns")]
    public void A_system_that_is_not_square_is_refused_at_the_equations_field(string[] equations, string message)
    {
        var problem = SingleProblem(TestFamilies.Json("not square", ["x", "y"], equations));

        AssertProblem(problem, "equations", message);
    }

    [Fact]
    public void A_name_repeated_among_the_unknowns_is_refused_at_its_second_use()
    {
        var problem = SingleProblem(TestFamilies.Json("twice", ["x", "y", "x"], ["x", "y", "x - y"]));

        AssertProblem(problem, "unknown 3", "the unknown name 'x' is used twice");
    }

    [Fact]
    public void A_name_repeated_among_the_parameters_is_refused_at_its_second_use()
    {
        var problem = SingleProblem(TestFamilies.Json("twice", ["x"], ["x - p"], [("p", 0, 1), ("q", 0, 1), ("p", 2, 3)]));

        AssertProblem(problem, "parameters[2].name", "the parameter name 'p' is used twice");
    }

    [Fact]
    public void A_name_repeated_among_the_constants_is_refused_as_a_duplicate_key()
    {
        var json = """{ "family": "twice", "unknowns": ["x"], "constants": { "k": 1, "k": 2 }, "equations": ["x - k"] }""";

        var problem = SingleProblem(json);

        AssertProblem(problem, "constants.k", "duplicate constant 'k'");
    }

    [Theory]
    [InlineData("x", "q", "parameters[0].name", "the name 'x' is used as both an unknown and a parameter")]
    [InlineData("p", "x", "constants.x", "the name 'x' is used as both an unknown and a constant")]
    [InlineData("p", "p", "constants.p", "the name 'p' is used as both a parameter and a constant")]
    public void A_name_used_across_unknowns_parameters_and_constants_is_refused(
        string parameter, string constant, string location, string message)
    {
        var json = TestFamilies.Json(
            "across", ["x"], ["x - 1"], [(parameter, 0, 1)], new Dictionary<string, double> { [constant] = 2 });

        var problem = SingleProblem(json);

        AssertProblem(problem, location, message);
    }

    [Theory]
    [InlineData("x y", "unknown 1")]
    [InlineData("2x", "unknown 1")]
    [InlineData("x-1", "unknown 1")]
    [InlineData("θ", "unknown 1")]
    public void An_unknown_name_that_is_not_an_identifier_is_refused(string name, string location)
    {
        var problem = SingleProblem(TestFamilies.Json("names", [name], ["x"]));

        AssertProblem(problem, location, $"'{name}' is not a valid name; names match [A-Za-z_][A-Za-z0-9_]*");
    }

    [Fact]
    public void A_parameter_or_constant_name_that_is_not_an_identifier_is_refused_at_its_field()
    {
        var json = TestFamilies.Json(
            "names", ["x"], ["x - 1"], [("1p", 0, 1)], new Dictionary<string, double> { ["line-B"] = 2 });

        var error = Assert.Throws<InputException>(() => FamilyReader.Parse(json, Source));

        Assert.Collection(
            error.Problems,
            p => AssertProblem(p, "parameters[0].name", "'1p' is not a valid name"),
            p => AssertProblem(p, "constants.line-B", "'line-B' is not a valid name"));
    }

    [Fact]
    public void Names_with_underscores_and_digits_are_identifiers()
    {
        var family = TestFamilies.Build("names", ["_x1", "x_2"], ["_x1 - x_2", "_x1 + x_2 - A_0"], constants: new Dictionary<string, double> { ["A_0"] = 2 });

        Assert.Equal(["_x1", "x_2"], family.Unknowns);
        Assert.True(FamilyReader.IsIdentifier("_"));
        Assert.False(FamilyReader.IsIdentifier(string.Empty));
        Assert.False(FamilyReader.IsIdentifier("a.b"));
    }

    [Fact]
    public void An_unknown_identifier_gets_the_nearest_name_as_a_suggestion()
    {
        var problem = SingleProblem(FamilyWithConstantB("b*s - P"));

        AssertProblem(problem, "equation 2, column 1", "unknown name 'b' (did you mean 'B'?)");
    }

    [Fact]
    public void An_unknown_identifier_far_from_every_name_gets_no_suggestion()
    {
        var problem = SingleProblem(FamilyWithConstantB("B*s - voltage"));

        AssertProblem(problem, "equation 2, column 7", "unknown name 'voltage'");
        Assert.Equal("unknown name 'voltage'", problem.Message);
    }

    // ---------------------------------------------------------------- equations

    [Fact]
    public void An_equation_without_any_unknown_is_refused()
    {
        var problem = SingleProblem(TestFamilies.Json("no unknown", ["x"], ["2*p - B"], [("p", 0, 1)], new Dictionary<string, double> { ["B"] = 1 }));

        AssertProblem(problem, "equation 1", "the equation does not involve any unknown (degree 0 in the unknowns)");
    }

    [Theory]
    [InlineData("x - x")]
    [InlineData("0*x*p")]
    [InlineData("(x + p)^2 - x^2 - 2*x*p - p^2")]
    public void An_identically_zero_equation_is_refused(string equation)
    {
        var problem = SingleProblem(TestFamilies.Json("zero", ["x"], [equation], [("p", 0, 1)]));

        AssertProblem(problem, "equation 1", "the equation is identically zero");
    }

    [Theory]
    [InlineData("x/y", 3, "the denominator contains the unknown 'y'")]
    [InlineData("x/(2 + p)", 8, "the denominator contains the parameter 'p'")]
    [InlineData("y - x/(B*(1 - y^2))", 15, "the denominator contains the unknown 'y'")]
    public void Unknowns_or_parameters_in_a_denominator_are_refused_at_their_column(string equation, int column, string message)
    {
        var problem = SingleProblem(TestFamilies.Json("denominator", ["x", "y"], ["x + y", equation], [("p", 0, 1)], new Dictionary<string, double> { ["B"] = 2 }));

        AssertProblem(problem, $"equation 2, column {column}", message);
        Assert.EndsWith("only numbers and constants may appear in a denominator", problem.Message, StringComparison.Ordinal);
    }

    [Theory]
    [InlineData("x/0", 2)]
    [InlineData("x + 1/(B - 2)", 6)]
    [InlineData("x/(0.5 - 1/2)", 2)]
    public void Division_by_zero_is_refused_at_the_slash(string equation, int column)
    {
        var problem = SingleProblem(TestFamilies.Json("zero", ["x"], [equation], constants: new Dictionary<string, double> { ["B"] = 2 }));

        AssertProblem(problem, $"equation 1, column {column}", "division by zero: the denominator evaluates to 0");
    }

    [Fact]
    public void A_denominator_of_constants_and_numbers_is_accepted()
    {
        var family = TestFamilies.Build("denominator", ["x"], ["x/(2*B) - 1/B^2"], constants: new Dictionary<string, double> { ["B"] = 4 });
        var equation = family.System.Equations[0];

        Assert.Equal(0.125, Coefficient(equation, 1));
        Assert.Equal(-0.0625, Coefficient(equation, 0));
    }

    [Fact]
    public void A_syntax_error_is_located_by_equation_and_column()
    {
        var problem = SingleProblem(TestFamilies.Json("syntax", ["x", "y"], ["x + y", "x*(y - 1"]));

        AssertProblem(problem, "equation 2, column 3", "unclosed '('");
    }

    [Theory]
    [InlineData("x^2.5", 3, "bad exponent")]
    [InlineData("x^-2", 3, "bad exponent")]
    [InlineData("x^(2)", 3, "bad exponent")]
    [InlineData("x^2^3", 4, "chained '^'")]
    [InlineData("x^33", 3, "bad exponent: 33 exceeds the degree limit 32")]
    public void Bad_exponents_are_located_by_equation_and_column(string equation, int column, string message)
    {
        var problem = SingleProblem(TestFamilies.Json("exponents", ["x"], [equation]));

        AssertProblem(problem, $"equation 1, column {column}", message);
    }

    [Fact]
    public void A_number_too_large_for_double_precision_in_an_equation_is_refused()
    {
        var problem = SingleProblem(TestFamilies.Json("huge", ["x"], ["x - 1e999"]));

        AssertProblem(problem, "equation 1, column 5", "the number 1e999 is too large for double precision");
    }

    // ---------------------------------------------------------------- missing and empty fields

    [Theory]
    [InlineData("""{ "unknowns": ["x"], "equations": ["x"] }""", "", "missing field 'family'")]
    [InlineData("""{ "family": "f", "equations": ["x"] }""", "", "missing field 'unknowns'")]
    [InlineData("""{ "family": "f", "unknowns": ["x"] }""", "", "missing field 'equations'")]
    [InlineData("""{ "family": "", "unknowns": ["x"], "equations": ["x"] }""", "family", "the family name is empty")]
    [InlineData("""{ "family": "  ", "unknowns": ["x"], "equations": ["x"] }""", "family", "the family name is empty")]
    [InlineData("""{ "family": "f", "unknowns": [], "equations": ["x"] }""", "unknowns", "'unknowns' is empty; a family needs at least one unknown")]
    [InlineData("""{ "family": "f", "unknowns": ["x"], "equations": [] }""", "equations", "'equations' is empty; a family needs at least one equation")]
    [InlineData("""{ "family": "f", "unknowns": ["x", ""], "equations": ["x", "x"] }""", "unknown 2", "the unknown is empty")]
    [InlineData("""{ "family": "f", "unknowns": ["x", "y"], "equations": ["x", " "] }""", "equation 2", "the equation is empty")]
    [InlineData("""{ "family": "f", "unknowns": ["x"], "parameters": [ { "low": 0, "high": 1 } ], "equations": ["x"] }""", "parameters[0]", "missing field 'name'")]
    [InlineData("""{ "family": "f", "unknowns": ["x"], "parameters": [ { "name": "p", "high": 1 } ], "equations": ["x"] }""", "parameters[0]", "missing field 'low'")]
    [InlineData("""{ "family": "f", "unknowns": ["x"], "parameters": [ { "name": "p", "low": 0 } ], "equations": ["x"] }""", "parameters[0]", "missing field 'high'")]
    [InlineData("""{ "family": "f", "unknowns": ["x"], "parameters": [ { "name": "", "low": 0, "high": 1 } ], "equations": ["x"] }""", "parameters[0].name", "the parameter name is empty")]
    public void Missing_or_empty_fields_are_refused(string json, string location, string message)
    {
        var problem = SingleProblem(json);

        Assert.Equal(location, problem.Location);
        Assert.Equal(message, problem.Message);
        Assert.Equal(Source, problem.Source);
    }

    [Fact]
    public void An_empty_family_from_a_message_is_refused_with_the_same_locations()
    {
        var message = new Family { Family_ = " " };

        var error = Assert.Throws<InputException>(() => FamilyReader.FromMessage(message, "request"));

        Assert.Collection(
            error.Problems,
            p => Assert.Equal(new InputProblem("request", "family", "the family name is empty"), p),
            p => Assert.Equal(new InputProblem("request", "unknowns", "'unknowns' is empty; a family needs at least one unknown"), p));
    }

    [Fact]
    public void An_empty_equation_from_a_message_is_refused_at_column_1()
    {
        var message = new Family { Family_ = "f", Unknowns = { "x" }, Equations = { "" } };

        var error = Assert.Throws<InputException>(() => FamilyReader.FromMessage(message, "request"));

        Assert.Equal(new InputProblem("request", "equation 1, column 1", "the equation is empty"), Assert.Single(error.Problems));
    }

    // ---------------------------------------------------------------- box and numbers

    [Theory]
    [InlineData(1.0, 1.0, "low (1) must be below high (1) for parameter 'p'")]
    [InlineData(2.5, -1.5, "low (2.5) must be below high (-1.5) for parameter 'p'")]
    public void A_parameter_box_with_low_not_below_high_is_refused(double low, double high, string message)
    {
        var problem = SingleProblem(TestFamilies.Json("box", ["x"], ["x - p"], [("p", low, high)]));

        AssertProblem(problem, "parameters[0]", message);
    }

    [Fact]
    public void A_parameter_box_from_a_message_with_low_not_below_high_is_refused()
    {
        var message = new Family { Family_ = "f", Unknowns = { "x" }, Equations = { "x - p" } };
        message.Parameters.Add(new ParameterRange { Name = "p", Low = 0, High = 0 });

        var error = Assert.Throws<InputException>(() => FamilyReader.FromMessage(message, "request"));

        Assert.Equal(
            new InputProblem("request", "parameters[0]", "low (0) must be below high (0) for parameter 'p'"), Assert.Single(error.Problems));
    }

    [Theory]
    [InlineData("\"NaN\"", "1", "parameters[0].low", "NaN or infinite numbers are not allowed, found \"NaN\"")]
    [InlineData("0", "\"Infinity\"", "parameters[0].high", "NaN or infinite numbers are not allowed, found \"Infinity\"")]
    [InlineData("\"-Infinity\"", "0", "parameters[0].low", "NaN or infinite numbers are not allowed, found \"-Infinity\"")]
    [InlineData("-1e999", "0", "parameters[0].low", "the number -1e999 is not finite in double precision")]
    [InlineData("0", "1e999", "parameters[0].high", "the number 1e999 is not finite in double precision")]
    [InlineData("0", "\"1\"", "parameters[0].high", "expected a number, found the string \"1\"")]
    [InlineData("null", "1", "parameters[0].low", "expected a number, found null")]
    public void Parameter_bounds_must_be_finite_json_numbers(string low, string high, string location, string message)
    {
        var json = $$"""{ "family": "f", "unknowns": ["x"], "parameters": [ { "name": "p", "low": {{low}}, "high": {{high}} } ], "equations": ["x - p"] }""";

        var problem = SingleProblem(json);

        AssertProblem(problem, location, message);
    }

    [Theory]
    [InlineData("\"NaN\"", "NaN or infinite numbers are not allowed, found \"NaN\"")]
    [InlineData("\"Infinity\"", "NaN or infinite numbers are not allowed, found \"Infinity\"")]
    [InlineData("1e999", "the number 1e999 is not finite in double precision")]
    [InlineData("true", "expected a number, found the boolean true")]
    public void Constants_must_be_finite_json_numbers(string value, string message)
    {
        var json = $$"""{ "family": "f", "unknowns": ["x"], "constants": { "k": {{value}} }, "equations": ["x - k"] }""";

        var problem = SingleProblem(json);

        AssertProblem(problem, "constants.k", message);
    }

    [Fact]
    public void NaN_and_infinite_numbers_from_a_message_are_refused_at_their_fields()
    {
        var message = new Family { Family_ = "f", Unknowns = { "x" }, Equations = { "x - p - k" } };
        message.Parameters.Add(new ParameterRange { Name = "p", Low = double.NaN, High = double.PositiveInfinity });
        message.Constants.Add("k", double.NegativeInfinity);

        var error = Assert.Throws<InputException>(() => FamilyReader.FromMessage(message, "request"));

        Assert.Collection(
            error.Problems,
            p => Assert.Equal(new InputProblem("request", "parameters[0].low", "NaN or infinite numbers are not allowed, found NaN"), p),
            p => Assert.Equal(new InputProblem("request", "parameters[0].high", "NaN or infinite numbers are not allowed, found Infinity"), p),
            p => Assert.Equal(new InputProblem("request", "constants.k", "NaN or infinite numbers are not allowed, found -Infinity"), p));
    }

    [Theory]
    [InlineData("0", "expected a positive integer, found 0")]
    [InlineData("-2", "expected a positive integer, found -2")]
    [InlineData("2.5", "expected a positive integer, found 2.5")]
    [InlineData("\"4\"", "expected a positive integer, found the string \"4\"")]
    public void The_root_count_must_be_a_positive_integer(string value, string message)
    {
        var json = $$"""{ "family": "f", "unknowns": ["x"], "equations": ["x^2 - 1"], "rootCount": {{value}} }""";

        var problem = SingleProblem(json);

        AssertProblem(problem, "rootCount", message);
    }

    // ---------------------------------------------------------------- JSON syntax, types and fields

    [Fact]
    public void Invalid_json_syntax_is_located_by_line_and_column()
    {
        var json = "{\n  \"family\": \"f\"\n  \"unknowns\": [\"x\"],\n  \"equations\": [\"x\"]\n}";

        var problem = SingleProblem(json);

        AssertProblem(problem, "line 3, column 3", "invalid JSON: ");
        Assert.DoesNotContain("LineNumber", problem.Message, StringComparison.Ordinal);
        Assert.DoesNotContain("BytePosition", problem.Message, StringComparison.Ordinal);
    }

    [Theory]
    [InlineData("{ \"family\": \"f\", }", "line 1, column 18")]
    [InlineData("{ \"family\": \"f\"", "line 1, column 16")]
    [InlineData("", "line 1, column 1")]
    [InlineData("{ \"family\": 'f' }", "line 1, column 13")]
    public void Truncated_or_malformed_json_is_refused_with_its_position(string json, string location)
    {
        var problem = SingleProblem(json);

        AssertProblem(problem, location, "invalid JSON: ");
    }

    [Fact]
    public void The_json_column_counts_characters_not_utf8_bytes()
    {
        // "é" and "∆" take 2 and 3 bytes in UTF-8; the missing comma is before the 18th character (the 21st byte).
        var json = "{ \"family\": \"é∆\" \"unknowns\": [\"x\"], \"equations\": [\"x\"] }";

        var problem = SingleProblem(json);

        AssertProblem(problem, "line 1, column 18", "invalid JSON: ");
    }

    [Theory]
    [InlineData("""[ "family" ]""", "", "expected a JSON object at the top level, found an array")]
    [InlineData("""{ "family": 7, "unknowns": ["x"], "equations": ["x"] }""", "family", "expected a string, found the number 7")]
    [InlineData("""{ "family": "f", "description": ["d"], "unknowns": ["x"], "equations": ["x"] }""", "description", "expected a string, found an array")]
    [InlineData("""{ "family": "f", "unknowns": { "x": 1 }, "equations": ["x"] }""", "unknowns", "expected an array of strings, found an object")]
    [InlineData("""{ "family": "f", "unknowns": ["x", 2], "equations": ["x", "x"] }""", "unknown 2", "expected a string, found the number 2")]
    [InlineData("""{ "family": "f", "unknowns": ["x"], "equations": "x" }""", "equations", "expected an array of strings, found the string \"x\"")]
    [InlineData("""{ "family": "f", "unknowns": ["x"], "equations": [null] }""", "equation 1", "expected a string, found null")]
    [InlineData("""{ "family": "f", "unknowns": ["x"], "parameters": { "name": "p" }, "equations": ["x"] }""", "parameters", "expected an array of objects, found an object")]
    [InlineData("""{ "family": "f", "unknowns": ["x"], "parameters": [ "p" ], "equations": ["x"] }""", "parameters[0]", "expected an object with name, low and high, found the string \"p\"")]
    [InlineData("""{ "family": "f", "unknowns": ["x"], "parameters": [ { "name": 1, "low": 0, "high": 1 } ], "equations": ["x"] }""", "parameters[0].name", "expected a string, found the number 1")]
    [InlineData("""{ "family": "f", "unknowns": ["x"], "constants": [ 1 ], "equations": ["x"] }""", "constants", "expected an object of name: number, found an array")]
    public void Wrong_json_types_are_refused_at_their_field(string json, string location, string message)
    {
        var problem = SingleProblem(json);

        AssertProblem(problem, location, message);
    }

    [Fact]
    public void An_unknown_top_level_field_is_refused_with_a_suggestion_and_the_known_fields()
    {
        var json = """{ "family": "f", "unknowns": ["x"], "equations": ["x"], "constant": { "k": 1 } }""";

        var problem = SingleProblem(json);

        AssertProblem(
            problem,
            "constant",
            "unknown field 'constant' in a family (did you mean 'constants'?); known fields: family, description, unknowns, parameters, constants, equations, rootCount");
    }

    [Fact]
    public void An_unknown_parameter_field_is_refused_with_a_suggestion()
    {
        var json = """{ "family": "f", "unknowns": ["x"], "parameters": [ { "name": "p", "low": 0, "hihg": 1 } ], "equations": ["x - p"] }""";

        var error = Assert.Throws<InputException>(() => FamilyReader.Parse(json, Source));

        Assert.Collection(
            error.Problems,
            p => AssertProblem(p, "parameters[0].hihg", "unknown field 'hihg' in parameters[0] (did you mean 'high'?); known fields: name, low, high"),
            p => AssertProblem(p, "parameters[0]", "missing field 'high'"));
    }

    [Fact]
    public void An_unknown_field_far_from_every_known_field_gets_no_suggestion()
    {
        var problem = SingleProblem("""{ "family": "f", "unknowns": ["x"], "equations": ["x"], "colour": "blue" }""");

        AssertProblem(problem, "colour", "unknown field 'colour' in a family; known fields:");
        Assert.DoesNotContain("did you mean", problem.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void A_duplicate_top_level_field_is_refused()
    {
        var problem = SingleProblem("""{ "family": "f", "unknowns": ["x"], "family": "g", "equations": ["x"] }""");

        AssertProblem(problem, "family", "duplicate field 'family'");
    }

    [Fact]
    public void A_duplicate_parameter_field_is_refused()
    {
        var problem = SingleProblem("""{ "family": "f", "unknowns": ["x"], "parameters": [ { "name": "p", "low": 0, "high": 1, "low": -1 } ], "equations": ["x - p"] }""");

        AssertProblem(problem, "parameters[0].low", "duplicate field 'low'");
    }

    [Fact]
    public void Both_spellings_of_the_root_count_at_once_are_a_duplicate_field()
    {
        var problem = SingleProblem("""{ "family": "f", "unknowns": ["x"], "equations": ["x^2 - 1"], "rootCount": 2, "root_count": 2 }""");

        AssertProblem(problem, "root_count", "duplicate field 'root_count'");
    }

    // ---------------------------------------------------------------- UTF-8

    [Fact]
    public void Invalid_utf8_is_refused_at_the_offending_byte()
    {
        byte[] bytes = [.. "{ \"family\": \"f"u8, 0xFF, .. "\", \"unknowns\": [\"x\"], \"equations\": [\"x\"] }"u8];

        var problem = SingleProblem(bytes);

        AssertProblem(problem, "byte 15", "the file is not valid UTF-8");
    }

    [Fact]
    public void Invalid_utf8_after_a_byte_order_mark_is_located_in_the_whole_file()
    {
        byte[] bytes = [0xEF, 0xBB, 0xBF, .. "{ \"family\": \"f"u8, 0xC3, 0x28, .. "\" }"u8];

        var problem = SingleProblem(bytes);

        AssertProblem(problem, "byte 18", "the file is not valid UTF-8");
    }

    [Fact]
    public void A_truncated_multibyte_sequence_at_the_end_is_invalid_utf8()
    {
        byte[] bytes = [.. "{ \"family\": \"f\" }"u8, 0xE2, 0x88];

        var problem = SingleProblem(bytes);

        AssertProblem(problem, "byte 18", "the file is not valid UTF-8");
    }

    // ---------------------------------------------------------------- limits

    [Fact]
    public void The_file_size_limit_refuses_one_byte_more_and_accepts_exactly_the_limit()
    {
        var bytes = Encoding.UTF8.GetBytes(TwoBusLine);

        var problem = SingleProblem(bytes, new FamilyLimits { MaxFileBytes = bytes.Length - 1 });
        var family = FamilyReader.Parse(bytes, Source, new FamilyLimits { MaxFileBytes = bytes.Length });

        AssertProblem(problem, string.Empty, $"the family has {bytes.Length} bytes, above the limit of {bytes.Length - 1} bytes");
        Assert.Equal("two-bus line", family.Name);
    }

    [Fact]
    public void The_unknown_limit_refuses_one_more_and_accepts_exactly_the_limit()
    {
        var json = TestFamilies.Json("three", ["x", "y", "z"], ["x - 1", "y - 2", "z - 3"]);

        var problem = SingleProblem(json, new FamilyLimits { MaxUnknowns = 2 });
        var family = FamilyReader.Parse(json, Source, new FamilyLimits { MaxUnknowns = 3 });

        AssertProblem(problem, "unknowns", "3 unknowns, above the limit of 2");
        Assert.Equal(3, family.System.UnknownCount);
    }

    [Fact]
    public void The_parameter_limit_refuses_one_more_and_accepts_exactly_the_limit()
    {
        var json = TestFamilies.Json("two", ["x"], ["x - p - q"], [("p", 0, 1), ("q", 0, 1)]);

        var problem = SingleProblem(json, new FamilyLimits { MaxParameters = 1 });
        var family = FamilyReader.Parse(json, Source, new FamilyLimits { MaxParameters = 2 });

        AssertProblem(problem, "parameters", "2 parameters, above the limit of 1");
        Assert.Equal(2, family.System.ParameterCount);
    }

    [Fact]
    public void The_constant_limit_refuses_one_more_and_accepts_exactly_the_limit()
    {
        var json = TestFamilies.Json("two", ["x"], ["x - a - b"], constants: new Dictionary<string, double> { ["a"] = 1, ["b"] = 2 });

        var problem = SingleProblem(json, new FamilyLimits { MaxConstants = 1 });
        var family = FamilyReader.Parse(json, Source, new FamilyLimits { MaxConstants = 2 });

        AssertProblem(problem, "constants", "2 constants, above the limit of 1");
        Assert.Equal(-3, Coefficient(family.System.Equations[0], 0));
    }

    [Fact]
    public void The_name_length_limit_refuses_one_character_more()
    {
        var json = TestFamilies.Json("long", ["abcd"], ["abcd - 1"]);

        var problem = SingleProblem(json, new FamilyLimits { MaxNameLength = 3 });
        var family = FamilyReader.Parse(json, Source, new FamilyLimits { MaxNameLength = 4 });

        AssertProblem(problem, "unknown 1", "the name 'abcd' has 4 characters, above the limit of 3");
        Assert.Equal(["abcd"], family.Unknowns);
    }

    [Fact]
    public void The_expression_node_limit_refuses_one_node_more_and_accepts_exactly_the_limit()
    {
        // Nodes: x, x, +, x, +, 3, - : seven; the seventh is the '-' at column 11.
        var json = TestFamilies.Json("nodes", ["x"], ["x + x + x - 3"]);

        var problem = SingleProblem(json, new FamilyLimits { MaxExpressionNodes = 6 });
        var family = FamilyReader.Parse(json, Source, new FamilyLimits { MaxExpressionNodes = 7 });

        AssertProblem(problem, "equation 1, column 11", "the equation has more than 6 expression nodes (limit)");
        Assert.Equal(3, Coefficient(family.System.Equations[0], 1));
    }

    [Fact]
    public void The_nesting_limit_counts_each_parenthesis_once()
    {
        var json = TestFamilies.Json("nesting", ["x"], ["(((x))) - 1"]);

        var problem = SingleProblem(json, new FamilyLimits { MaxNestingDepth = 2 });
        var family = FamilyReader.Parse(json, Source, new FamilyLimits { MaxNestingDepth = 3 });

        AssertProblem(problem, "equation 1, column 3", "the equation nests deeper than 2 levels (limit)");
        Assert.Equal(1, Coefficient(family.System.Equations[0], 1));
    }

    [Fact]
    public void The_nesting_limit_counts_unary_minus_as_a_level()
    {
        var json = TestFamilies.Json("nesting", ["x"], ["- -(x) - 1"]);

        var problem = SingleProblem(json, new FamilyLimits { MaxNestingDepth = 2 });
        var family = FamilyReader.Parse(json, Source, new FamilyLimits { MaxNestingDepth = 3 });

        AssertProblem(problem, "equation 1, column 4", "the equation nests deeper than 2 levels (limit)");
        Assert.Equal(1, Coefficient(family.System.Equations[0], 1));
    }

    [Fact]
    public void Very_deep_nesting_is_an_input_error_under_the_default_limits_not_a_crash()
    {
        var equation = new string('(', 100_000) + "x" + new string(')', 100_000);

        var problem = SingleProblem(TestFamilies.Json("deep", ["x"], [equation]));

        AssertProblem(problem, "equation 1, column 201", "the equation nests deeper than 200 levels (limit)");
    }

    [Fact]
    public void A_long_flat_sum_at_the_default_node_limit_is_read()
    {
        var equation = string.Join(" + ", Enumerable.Repeat("x", 10_000));

        var family = FamilyReader.Parse(TestFamilies.Json("long", ["x"], [equation]), Source);

        Assert.Equal(10_000, Coefficient(family.System.Equations[0], 1));
    }

    [Fact]
    public void Long_sums_products_and_denominators_do_not_recurse_once_per_term()
    {
        // Each chain parses into a left-leaning tree 100,000 levels deep; reading once recursed that deep and
        // crashed the process (stack overflow) at about 40,000 terms when a server raised the node limit.
        var limits = new FamilyLimits { MaxExpressionNodes = 1_000_000, MaxFileBytes = 8 << 20 };
        var sum = string.Join(" + ", Enumerable.Repeat("x - 1", 100_000));
        var product = "y" + string.Concat(Enumerable.Repeat("*1", 100_000));
        var denominator = "z/(" + string.Join(" + ", Enumerable.Repeat("1", 100_000)) + ")";

        var family = FamilyReader.Parse(TestFamilies.Json("long", ["x", "y", "z"], [sum, product, denominator]), Source, limits);

        var equations = family.System.Equations;
        Assert.Equal(100_000, Coefficient(equations[0], 1, 0, 0));
        Assert.Equal(-100_000, Coefficient(equations[0], 0, 0, 0));
        Assert.Equal(1, Coefficient(equations[1], 0, 1, 0));
        Assert.Equal(1e-5, Coefficient(equations[2], 0, 0, 1), 15);
    }

    [Fact]
    public void A_variable_at_the_end_of_a_long_denominator_is_still_found()
    {
        var limits = new FamilyLimits { MaxExpressionNodes = 1_000_000, MaxFileBytes = 8 << 20 };
        var equation = "x/(" + string.Join(" + ", Enumerable.Repeat("1", 50_000)) + " + x)";

        var problem = SingleProblem(TestFamilies.Json("long", ["x"], [equation]), limits);

        AssertProblem(problem, $"equation 1, column {equation.Length - 1}", "the denominator contains the unknown 'x'");
    }

    [Fact]
    public void The_degree_limit_refuses_an_exponent_above_it_and_accepts_the_limit()
    {
        var limits = new FamilyLimits { MaxDegree = 3 };

        var problem = SingleProblem(TestFamilies.Json("degree", ["x"], ["x^4 - 1"]), limits);
        var family = FamilyReader.Parse(TestFamilies.Json("degree", ["x"], ["x^3 - 1"]), Source, limits);

        AssertProblem(problem, "equation 1, column 3", "bad exponent: 4 exceeds the degree limit 3");
        Assert.Equal([3], family.System.Degrees);
    }

    [Fact]
    public void The_degree_limit_refuses_a_product_that_exceeds_it_in_the_unknowns()
    {
        var limits = new FamilyLimits { MaxDegree = 3 };

        var problem = SingleProblem(TestFamilies.Json("degree", ["x", "y"], ["x + y", "x^2*y^2 - 1"]), limits);
        var family = FamilyReader.Parse(TestFamilies.Json("degree", ["x", "y"], ["x + y", "x^2*y - 1"]), Source, limits);

        AssertProblem(problem, "equation 2, column 4", "the degree in the unknowns reaches 4, above the limit 3");
        Assert.Equal([1, 3], family.System.Degrees);
    }

    [Fact]
    public void The_degree_limit_refuses_a_power_that_exceeds_it_in_the_parameters()
    {
        var limits = new FamilyLimits { MaxDegree = 3 };

        var problem = SingleProblem(TestFamilies.Json("degree", ["x"], ["x - (p*q)^2"], [("p", 0, 1), ("q", 0, 1)]), limits);

        AssertProblem(problem, "equation 1, column 10", "the degree in the parameters reaches 4, above the limit 3");
    }

    [Fact]
    public void The_term_limit_refuses_an_equation_that_expands_to_one_term_more()
    {
        // (x + y)^2 - 1 = x² + 2xy + y² - 1: four terms.
        var json = TestFamilies.Json("terms", ["x", "y"], ["x - y", "(x + y)^2 - 1"]);

        var problem = SingleProblem(json, new FamilyLimits { MaxTerms = 3 });
        var family = FamilyReader.Parse(json, Source, new FamilyLimits { MaxTerms = 4 });

        AssertProblem(problem, "equation 2", "the equation expands to 4 terms, above the limit of 3");
        Assert.Equal(4, family.System.Equations[1].TermCount);
    }

    [Fact]
    public void The_term_limit_stops_an_expansion_midway_at_the_operator()
    {
        // (x + y + 1)^2 has six terms; the limit of five is crossed while squaring, at the '^' in column 12.
        var json = TestFamilies.Json("terms", ["x", "y"], ["x - y", "(x + y + 1)^2"]);

        var problem = SingleProblem(json, new FamilyLimits { MaxTerms = 5 });
        var family = FamilyReader.Parse(json, Source, new FamilyLimits { MaxTerms = 6 });

        AssertProblem(problem, "equation 2, column 12", "the expansion exceeds 5 terms (limit)");
        Assert.Equal(6, family.System.Equations[1].TermCount);
    }

    [Fact]
    public void The_term_limit_refuses_a_huge_expansion_quickly()
    {
        // (x + y + z + 1)^32 would have 58,905 terms; with a limit of 1,000 it must stop early.
        var json = TestFamilies.Json("terms", ["x", "y", "z"], ["x", "y", "(x + y + z + 1)^32"]);
        var watch = System.Diagnostics.Stopwatch.StartNew();

        var problem = SingleProblem(json, new FamilyLimits { MaxTerms = 1_000 });

        AssertProblem(problem, "equation 3, column 16", "the expansion exceeds 1000 terms (limit)");
        Assert.True(watch.Elapsed < TimeSpan.FromSeconds(5), $"took {watch.Elapsed}");
    }

    // ---------------------------------------------------------------- helpers

    private static string FamilyWithConstantB(string secondEquation) => TestFamilies.Json(
        "two-bus", ["c", "s"], ["c^2 + s^2 - 1", secondEquation], [("P", -3, 3)], new Dictionary<string, double> { ["B"] = 1.7 });

    private static InputProblem SingleProblem(string json, FamilyLimits? limits = null) =>
        SingleProblem(Encoding.UTF8.GetBytes(json), limits);

    private static InputProblem SingleProblem(byte[] utf8Json, FamilyLimits? limits = null)
    {
        var error = Assert.Throws<InputException>(() => FamilyReader.Parse(utf8Json, Source, limits));
        var problem = Assert.Single(error.Problems);
        Assert.Equal(problem.ToString(), error.Message);
        return problem;
    }

    private static void AssertProblem(InputProblem problem, string location, string messagePart)
    {
        Assert.Equal(Source, problem.Source);
        Assert.Equal(location, problem.Location);
        Assert.Contains(messagePart, problem.Message, StringComparison.Ordinal);
    }

    /// <summary>The coefficient of the monomial with the given exponents (0 when absent).</summary>
    private static double Coefficient(Polynomial polynomial, params int[] exponents)
    {
        for (var t = 0; t < polynomial.TermCount; t++)
        {
            if (polynomial.ExponentsOf(t).SequenceEqual(exponents))
            {
                return polynomial.CoefficientOf(t);
            }
        }

        return 0;
    }
}
