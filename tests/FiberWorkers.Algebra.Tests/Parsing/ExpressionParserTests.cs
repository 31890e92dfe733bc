using System.Globalization;
using System.Numerics;
using System.Text;
using CsCheck;
using FiberWorkers.Algebra.Families;
using FiberWorkers.Algebra.Parsing;
using FiberWorkers.Algebra.Polynomials;
using FiberWorkers.Testing;

namespace FiberWorkers.Algebra.Tests.Parsing;

/// <summary>
/// The expression parser and the polynomial builder: syntax, precedence (checked through the expanded
/// polynomial), exponents, denominators and the columns that errors point at.
/// Variables are x, y (unknowns) and p (parameter), in that order; B = 3 and k1 = 0.5 are constants.
/// </summary>
public sealed class ExpressionParserTests
{
    private static readonly string[] Unknowns = ["x", "y"];
    private static readonly string[] Parameters = ["p"];
    private static readonly Dictionary<string, double> Constants = new(StringComparer.Ordinal) { ["B"] = 3, ["k1"] = 0.5 };

    // ---------------------------------------------------------------- numbers

    [Fact]
    public void Scientific_and_decimal_numbers_parse_to_their_values()
    {
        var polynomial = Expand("1e-3*x + 2.5E+2*y + .5 + 0.25e1*p");

        AssertTerms(polynomial, ([1, 0, 0], 1e-3), ([0, 1, 0], 250), ([0, 0, 1], 2.5), ([0, 0, 0], 0.5));
    }

    [Theory]
    [InlineData("7", 7.0)]
    [InlineData("007", 7.0)]
    [InlineData("3.25", 3.25)]
    [InlineData(".125", 0.125)]
    [InlineData("1E3", 1000.0)]
    [InlineData("1e+2", 100.0)]
    [InlineData("5e-1", 0.5)]
    [InlineData("1.5e-2", 0.015)]
    [InlineData("1e308", 1e308)]
    [InlineData("1e-320", 1e-320)]
    public void A_number_literal_is_read_exactly_as_its_decimal_value(string literal, double value)
    {
        var polynomial = Expand($"{literal}*x");

        AssertTerms(polynomial, ([1, 0, 0], value));
    }

    [Theory]
    [InlineData("x + 1.", 5, "a decimal point must be followed by digits")]
    [InlineData("x + 1.e3", 5, "a decimal point must be followed by digits")]
    [InlineData("x + .", 5, "a decimal point must be followed by digits")]
    [InlineData("x + 1e", 5, "the exponent of a number in scientific notation needs digits")]
    [InlineData("x + 2E-", 5, "the exponent of a number in scientific notation needs digits")]
    [InlineData("x - 1e999", 5, "the number 1e999 is too large for double precision")]
    [InlineData("x + 2.5e400*y", 5, "the number 2.5e400 is too large for double precision")]
    public void A_malformed_or_infinite_number_is_refused_at_its_first_column(string text, int column, string message)
    {
        var error = Refused(text);

        Assert.Equal(column, error.Column);
        Assert.Equal(message, error.Message);
    }

    // ---------------------------------------------------------------- precedence and associativity

    [Fact]
    public void Multiplication_binds_tighter_than_addition()
    {
        AssertTerms(Expand("2 + 3*x"), ([1, 0, 0], 3), ([0, 0, 0], 2));
        AssertTerms(Expand("(2 + 3)*x"), ([1, 0, 0], 5));
        AssertTerms(Expand("x + y*p"), ([0, 1, 1], 1), ([1, 0, 0], 1));
    }

    [Fact]
    public void Power_binds_tighter_than_multiplication()
    {
        AssertTerms(Expand("2*x^2"), ([2, 0, 0], 2));
        AssertTerms(Expand("x*y^2"), ([1, 2, 0], 1));
        AssertTerms(Expand("(x*y)^2"), ([2, 2, 0], 1));
        AssertTerms(Expand("2*3^2*x"), ([1, 0, 0], 18));
    }

    [Fact]
    public void Minus_x_squared_is_the_negative_of_x_squared()
    {
        var polynomial = Expand("-x^2 + 4");

        AssertTerms(polynomial, ([2, 0, 0], -1), ([0, 0, 0], 4));
        Assert.Equal(new Complex(-5, 0), polynomial.Evaluate([3, 0, 0]));
        AssertTerms(Expand("(-x)^2"), ([2, 0, 0], 1));
        AssertTerms(Expand("-2^2*x"), ([1, 0, 0], -4));
        AssertTerms(Expand("2*-x^2"), ([2, 0, 0], -2));
    }

    [Fact]
    public void Unary_minus_applies_to_operands_of_products_and_repeats()
    {
        AssertTerms(Expand("x*-y"), ([1, 1, 0], -1));
        AssertTerms(Expand("--x"), ([1, 0, 0], 1));
        AssertTerms(Expand("- - -x"), ([1, 0, 0], -1));
        AssertTerms(Expand("x - -y"), ([1, 0, 0], 1), ([0, 1, 0], 1));
    }

    [Fact]
    public void Subtraction_is_left_associative()
    {
        AssertTerms(Expand("x - y - 1"), ([1, 0, 0], 1), ([0, 1, 0], -1), ([0, 0, 0], -1));
        AssertTerms(Expand("x - (y - 1)"), ([1, 0, 0], 1), ([0, 1, 0], -1), ([0, 0, 0], 1));
    }

    [Fact]
    public void Division_is_left_associative_so_a_over_2_over_4_is_a_over_8()
    {
        AssertTerms(Expand("x/2/4"), ([1, 0, 0], 0.125));
        AssertTerms(Expand("x/2*4"), ([1, 0, 0], 2));
        AssertTerms(Expand("8/4/2*x"), ([1, 0, 0], 1));
        AssertTerms(Expand("x/(2/4)"), ([1, 0, 0], 2));
    }

    [Fact]
    public void Whitespace_of_any_kind_between_tokens_is_ignored()
    {
        AssertTerms(Expand(" \tx\n+\r\n2 * y ^ 2 "), ([0, 2, 0], 2), ([1, 0, 0], 1));
    }

    [Fact]
    public void Products_of_sums_are_expanded()
    {
        // (x + 1)(x - 1) = x² - 1 and (x + y)^3 = x³ + 3x²y + 3xy² + y³.
        AssertTerms(Expand("(x + 1)*(x - 1)"), ([2, 0, 0], 1), ([0, 0, 0], -1));
        AssertTerms(Expand("(x + y)^3"), ([3, 0, 0], 1), ([2, 1, 0], 3), ([1, 2, 0], 3), ([0, 3, 0], 1));
        AssertTerms(Expand("(x^2)^3 + x^0"), ([6, 0, 0], 1), ([0, 0, 0], 1));
    }

    [Fact]
    public void Sums_of_products_evaluate_like_the_arithmetic_they_spell()
    {
        var x = 1.25;
        var y = -0.75;
        var p = 0.5;
        var terms = Gen.Select(Gen.Int[-1, 1], Gen.Int[1, 9], Gen.Int[0, 3], Gen.Int[0, 3], Gen.Int[0, 2], Gen.Bool)
            .Array[1, 6];

        terms.Sample(
            sample =>
            {
                var text = new StringBuilder();
                var expected = 0.0;
                foreach (var (sign, coefficient, xPower, yPower, pPower, spelledOut) in sample)
                {
                    var negative = sign < 0;
                    text.Append(text.Length == 0 ? (negative ? "-" : string.Empty) : (negative ? " - " : " + "));
                    text.Append(coefficient.ToString(CultureInfo.InvariantCulture));
                    AppendPower(text, "x", xPower, spelledOut);
                    AppendPower(text, "y", yPower, spelledOut);
                    AppendPower(text, "p", pPower, spelledOut);
                    var value = coefficient * Math.Pow(x, xPower) * Math.Pow(y, yPower) * Math.Pow(p, pPower);
                    expected += negative ? -value : value;
                }

                var actual = Expand(text.ToString()).Evaluate([x, y, p]);

                Assert.True(Math.Abs(actual.Real - expected) <= 1e-12 * (1 + Math.Abs(expected)), $"{text}: {actual.Real} vs {expected}");
                Assert.Equal(0, actual.Imaginary);
            },
            iter: 500,
            seed: "0N0XIzNsQ0O9");
    }

    [Fact]
    public void The_tree_and_the_expanded_polynomial_agree_at_a_complex_point()
    {
        const string text = "-(x - 2*y)^3/4 + B*p*x - k1*(y + p)^2 + x/(B^2 - 1)";
        var point = new Complex[] { new(0.3, -1.1), new(-0.7, 0.4), new(1.5, 0.2) };
        var limits = FamilyLimits.Default;

        var tree = ExpressionParser.Parse(text, limits.MaxExpressionNodes, limits.MaxNestingDepth, limits.MaxDegree);
        var direct = tree.Evaluate(name => name switch
        {
            "x" => point[0],
            "y" => point[1],
            "p" => point[2],
            _ => Constants[name],
        });
        var expanded = Expand(text).Evaluate(point);

        Assert.True(Complex.Abs(direct - expanded) <= 1e-13 * Complex.Abs(direct), $"{direct} vs {expanded}");
    }

    // ---------------------------------------------------------------- names and constants

    [Fact]
    public void Constants_are_substituted_by_their_values()
    {
        AssertTerms(Expand("B*x + k1"), ([1, 0, 0], 3), ([0, 0, 0], 0.5));
        AssertTerms(Expand("B^2*p"), ([0, 0, 1], 9));
        AssertTerms(Expand("x/B^2"), ([1, 0, 0], 1.0 / 9));
    }

    [Fact]
    public void An_unknown_name_is_refused_with_the_nearest_known_name()
    {
        var error = Refused("x + k2*y");

        Assert.Equal(5, error.Column);
        Assert.Equal("unknown name 'k2' (did you mean 'k1'?)", error.Message);
    }

    [Fact]
    public void An_unknown_name_that_differs_only_in_case_suggests_that_name()
    {
        var error = Refused("x + b");

        Assert.Equal(5, error.Column);
        Assert.Equal("unknown name 'b' (did you mean 'B'?)", error.Message);
    }

    [Theory]
    [InlineData("x + z", 5)]
    [InlineData("x*frequency", 3)]
    [InlineData("(y - q)^2", 6)]
    public void An_unknown_name_far_from_every_known_name_gets_no_suggestion(string text, int column)
    {
        var error = Refused(text);

        Assert.Equal(column, error.Column);
        Assert.StartsWith("unknown name '", error.Message, StringComparison.Ordinal);
        Assert.DoesNotContain("did you mean", error.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void Names_are_case_sensitive_identifiers_with_underscores_and_digits()
    {
        var builder = new PolynomialBuilder(["x_1", "X_1"], [], new Dictionary<string, double>(StringComparer.Ordinal) { ["_c2"] = 2 }, FamilyLimits.Default);

        var polynomial = builder.Build(Parse("x_1 - _c2*X_1"));

        AssertTerms(polynomial, ([1, 0], 1), ([0, 1], -2));
    }

    // ---------------------------------------------------------------- exponents

    [Theory]
    [InlineData("x^2.5", 3, "bad exponent: 2.5 is not an integer")]
    [InlineData("x^2.", 3, "bad exponent: 2. is not an integer")]
    [InlineData("x^1e2", 3, "bad exponent: 1e2 is not an integer")]
    [InlineData("x^-2", 3, "bad exponent: a negative exponent is not allowed")]
    [InlineData("x^ -1", 4, "bad exponent: a negative exponent is not allowed")]
    [InlineData("x^(2)", 3, "bad exponent: '^' must be followed by a non-negative integer literal, found '('")]
    [InlineData("x^y", 3, "bad exponent: '^' must be followed by a non-negative integer literal, found 'y'")]
    [InlineData("x^B", 3, "bad exponent: '^' must be followed by a non-negative integer literal, found 'B'")]
    [InlineData("x^", 3, "bad exponent: '^' must be followed by a non-negative integer literal, found the end of the equation")]
    [InlineData("x^33", 3, "bad exponent: 33 exceeds the degree limit 32")]
    [InlineData("y + x^99999999999", 7, "bad exponent: 99999999999 exceeds the degree limit 32")]
    public void A_bad_exponent_is_refused_at_the_exponent(string text, int column, string message)
    {
        var error = Refused(text);

        Assert.Equal(column, error.Column);
        Assert.StartsWith(message, error.Message, StringComparison.Ordinal);
    }

    [Theory]
    [InlineData("x^2^3", 4)]
    [InlineData("x^2 ^ 3", 5)]
    [InlineData("p + x^1^1", 8)]
    public void A_chained_power_is_refused_at_the_second_caret(string text, int column)
    {
        var error = Refused(text);

        Assert.Equal(column, error.Column);
        Assert.Equal("chained '^' is ambiguous; write (a^b)^c with parentheses", error.Message);
    }

    [Fact]
    public void A_power_at_the_degree_limit_is_accepted_and_a_product_above_it_is_refused()
    {
        var limits = new FamilyLimits { MaxDegree = 4 };

        var atLimit = Expand("x^4 + y^2*x^2", limits);
        var above = Refused("x^2*y*x^2", limits);

        Assert.Equal(4, atLimit.Degree(0, 2));
        Assert.Equal(6, above.Column);
        Assert.Equal("the degree in the unknowns reaches 5, above the limit 4", above.Message);
    }

    // ---------------------------------------------------------------- denominators

    [Theory]
    [InlineData("x/y", 3, "the denominator contains the unknown 'y'; only numbers and constants may appear in a denominator")]
    [InlineData("x/(1 + y^2)", 8, "the denominator contains the unknown 'y'; only numbers and constants may appear in a denominator")]
    [InlineData("1/x", 3, "the denominator contains the unknown 'x'; only numbers and constants may appear in a denominator")]
    [InlineData("x/p", 3, "the denominator contains the parameter 'p'; only numbers and constants may appear in a denominator")]
    [InlineData("x/(B*p)", 6, "the denominator contains the parameter 'p'; only numbers and constants may appear in a denominator")]
    [InlineData("x/(0*y)", 6, "the denominator contains the unknown 'y'; only numbers and constants may appear in a denominator")]
    [InlineData("x/zz", 3, "unknown name 'zz'")]
    public void Unknowns_or_parameters_in_a_denominator_are_refused_at_their_column(string text, int column, string message)
    {
        var error = Refused(text);

        Assert.Equal(column, error.Column);
        Assert.Equal(message, error.Message);
    }

    [Theory]
    [InlineData("x/0", 2)]
    [InlineData("x/0.0e5", 2)]
    [InlineData("y + x/(B - 3)", 6)]
    [InlineData("x/(2*k1 - 1)", 2)]
    [InlineData("x/(1e-200*1e-200)", 2)]
    public void Division_by_zero_is_refused_at_the_slash(string text, int column)
    {
        var error = Refused(text);

        Assert.Equal(column, error.Column);
        Assert.Equal("division by zero: the denominator evaluates to 0", error.Message);
    }

    [Fact]
    public void A_denominator_too_small_to_invert_is_refused_at_the_slash()
    {
        var error = Refused("x/1e-310");

        Assert.Equal(2, error.Column);
        Assert.Contains("is too small to divide by", error.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void A_denominator_of_numbers_and_constants_divides_every_term()
    {
        AssertTerms(Expand("(x + 2*y)/(B + 1)"), ([1, 0, 0], 0.25), ([0, 1, 0], 0.5));
        AssertTerms(Expand("x/-2"), ([1, 0, 0], -0.5));
        AssertTerms(Expand("x/(k1^2)"), ([1, 0, 0], 4));
    }

    // ---------------------------------------------------------------- syntax errors and columns

    [Theory]
    [InlineData("x + (y", 5, "unclosed '('")]
    [InlineData("((x + y)", 1, "unclosed '('")]
    [InlineData("x*(y - (1 + p)", 3, "unclosed '('")]
    [InlineData("x + y)", 6, "unmatched ')'")]
    [InlineData("(x + y))", 8, "unmatched ')'")]
    [InlineData(")", 1, "unexpected ')'; expected a number, a name or '('")]
    [InlineData("x + ()", 6, "unexpected ')'; expected a number, a name or '('")]
    public void Unbalanced_parentheses_are_refused_at_the_parenthesis(string text, int column, string message)
    {
        var error = Refused(text);

        Assert.Equal(column, error.Column);
        Assert.Equal(message, error.Message);
    }

    [Theory]
    [InlineData("x # y", 3, "unexpected '#'; expected an operator")]
    [InlineData("x + #", 5, "unexpected '#'")]
    [InlineData("x + y;", 6, "unexpected ';'; expected an operator")]
    [InlineData("x + é", 5, "unexpected character U+00E9")]
    [InlineData("x = y", 3, "unexpected '='; expected an operator")]
    [InlineData("x y", 3, "unexpected 'y'; expected an operator")]
    [InlineData("x ** 2", 4, "unexpected '*'; expected a number, a name or '('")]
    [InlineData("+x", 1, "unexpected '+'; expected a number, a name or '('")]
    [InlineData("x + * y", 5, "unexpected '*'; expected a number, a name or '('")]
    public void An_unexpected_character_is_refused_at_its_column(string text, int column, string message)
    {
        var error = Refused(text);

        Assert.Equal(column, error.Column);
        Assert.Equal(message, error.Message);
    }

    [Theory]
    [InlineData("2x", 2, "a name cannot follow the number '2' directly; write '*' between them")]
    [InlineData("y + 3.5x", 8, "a name cannot follow the number '3.5' directly; write '*' between them")]
    [InlineData("1e-3y", 5, "a name cannot follow the number '1e-3' directly; write '*' between them")]
    [InlineData("2(x + 1)", 2, "unexpected '('; expected an operator")]
    [InlineData("(x + 1)(x - 1)", 8, "unexpected '('; expected an operator")]
    [InlineData("x (y)", 3, "unexpected '('; expected an operator")]
    public void Implicit_multiplication_is_refused_at_the_second_factor(string text, int column, string message)
    {
        var error = Refused(text);

        Assert.Equal(column, error.Column);
        Assert.Equal(message, error.Message);
    }

    [Theory]
    [InlineData("x +", 4)]
    [InlineData("x*y -", 6)]
    [InlineData("x * ", 5)]
    [InlineData("x/", 3)]
    [InlineData("-", 2)]
    [InlineData("(x + ", 6)]
    public void A_trailing_operator_is_refused_at_the_end_of_the_equation(string text, int column)
    {
        var error = Refused(text);

        Assert.Equal(column, error.Column);
        Assert.Equal("unexpected end of the equation; expected a number, a name or '('", error.Message);
    }

    [Theory]
    [InlineData("")]
    [InlineData("   ")]
    [InlineData("\t\n")]
    public void An_empty_expression_is_refused_at_column_1(string text)
    {
        var error = Refused(text);

        Assert.Equal(1, error.Column);
        Assert.Equal("the equation is empty", error.Message);
    }

    [Fact]
    public void Columns_count_characters_from_1_including_leading_whitespace()
    {
        Assert.Equal(4, Refused("   zz").Column);
        Assert.Equal(1, Refused("zz").Column);
        Assert.Equal(9, Refused("x\t+\ty + zz").Column);
    }

    [Fact]
    public void A_syntax_error_in_a_family_is_located_by_equation_and_column()
    {
        var json = TestFamilies.Json("syntax", ["x", "y"], ["x^2 + y^2 - 1", "x - 2y"]);

        var error = Assert.Throws<InputException>(() => FamilyReader.Parse(json, "circle.json"));

        Assert.Equal("circle.json: equation 2, column 6: a name cannot follow the number '2' directly; write '*' between them", error.Message);
    }

    [Fact]
    public void Each_equation_of_a_family_reports_its_own_first_error()
    {
        var json = TestFamilies.Json("syntax", ["x", "y", "z"], ["x + (y", "y^-1", "z + + q"]);

        var error = Assert.Throws<InputException>(() => FamilyReader.Parse(json, "three.json"));

        Assert.Collection(
            error.Problems,
            p => Assert.Equal(new InputProblem("three.json", "equation 1, column 5", "unclosed '('"), p),
            p => Assert.Equal("equation 2, column 3", p.Location),
            p => Assert.Equal(new InputProblem("three.json", "equation 3, column 5", "unexpected '+'; expected a number, a name or '('"), p));
    }

    // ---------------------------------------------------------------- parser limits

    [Fact]
    public void The_node_limit_is_exact()
    {
        // x, y, *, 2, + : five nodes; the fifth is the '+' at column 5.
        var error = Assert.Throws<ExpressionSyntaxException>(() => ExpressionParser.Parse("x*y + 2", 4, 10, 10));
        var tree = ExpressionParser.Parse("x*y + 2", 5, 10, 10);

        Assert.Equal(5, error.Column);
        Assert.Equal("the equation has more than 4 expression nodes (limit)", error.Message);
        Assert.IsType<BinaryNode>(tree);
    }

    [Fact]
    public void The_nesting_limit_is_exact_and_points_at_the_parenthesis_that_crosses_it()
    {
        var error = Assert.Throws<ExpressionSyntaxException>(() => ExpressionParser.Parse("x*(y + (p - (1)))", 100, 2, 10));
        var tree = ExpressionParser.Parse("x*(y + (p - (1)))", 100, 3, 10);

        Assert.Equal(13, error.Column);
        Assert.Equal("the equation nests deeper than 2 levels (limit)", error.Message);
        Assert.IsType<BinaryNode>(tree);
    }

    [Fact]
    public void Parsing_records_columns_of_operators_and_operands()
    {
        var tree = Assert.IsType<BinaryNode>(Parse("  x - y^2"));

        Assert.Equal(BinaryOperator.Subtract, tree.Operator);
        Assert.Equal(5, tree.Column);
        Assert.Equal(3, Assert.IsType<NameNode>(tree.Left).Column);
        var power = Assert.IsType<PowerNode>(tree.Right);
        Assert.Equal(8, power.Column);
        Assert.Equal(2, power.Exponent);
        Assert.Equal(7, Assert.IsType<NameNode>(power.Base).Column);
    }

    // ---------------------------------------------------------------- helpers

    private static void AppendPower(StringBuilder text, string name, int power, bool spelledOut)
    {
        if (power == 0)
        {
            return;
        }

        if (spelledOut)
        {
            for (var i = 0; i < power; i++)
            {
                text.Append('*').Append(name);
            }
        }
        else
        {
            text.Append('*').Append(name).Append('^').Append(power.ToString(CultureInfo.InvariantCulture));
        }
    }

    private static ExpressionNode Parse(string text)
    {
        var limits = FamilyLimits.Default;
        return ExpressionParser.Parse(text, limits.MaxExpressionNodes, limits.MaxNestingDepth, limits.MaxDegree);
    }

    private static Polynomial Expand(string text, FamilyLimits? limits = null)
    {
        limits ??= FamilyLimits.Default;
        var tree = ExpressionParser.Parse(text, limits.MaxExpressionNodes, limits.MaxNestingDepth, limits.MaxDegree);
        return new PolynomialBuilder(Unknowns, Parameters, Constants, limits).Build(tree);
    }

    private static ExpressionSyntaxException Refused(string text, FamilyLimits? limits = null) =>
        Assert.Throws<ExpressionSyntaxException>(() => Expand(text, limits));

    /// <summary>Asserts the polynomial has exactly these terms; coefficients agree to 15 significant digits.</summary>
    private static void AssertTerms(Polynomial polynomial, params (int[] Exponents, double Coefficient)[] expected)
    {
        var actual = Enumerable.Range(0, polynomial.TermCount)
            .Select(t => $"[{string.Join(",", polynomial.ExponentsOf(t).ToArray())}]")
            .Order(StringComparer.Ordinal)
            .ToArray();
        var wanted = expected.Select(e => $"[{string.Join(",", e.Exponents)}]").Order(StringComparer.Ordinal).ToArray();
        Assert.Equal(wanted, actual);
        foreach (var (exponents, coefficient) in expected)
        {
            var term = Enumerable.Range(0, polynomial.TermCount).Single(t => polynomial.ExponentsOf(t).SequenceEqual(exponents));
            var value = polynomial.CoefficientOf(term);
            Assert.True(
                Math.Abs(value - coefficient) <= 1e-15 * Math.Abs(coefficient),
                $"coefficient of [{string.Join(",", exponents)}]: {value:R}, expected {coefficient:R}");
        }
    }
}
