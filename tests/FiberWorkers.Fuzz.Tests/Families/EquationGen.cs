using System.Globalization;
using CsCheck;

namespace FiberWorkers.Fuzz.Tests.Families;

/// <summary>
/// CsCheck generators of equation text over given names: mostly well-formed expressions (so that many reach the
/// polynomial builder, the compiler and the evaluator), with odd numbers, exponents at and past the degree limit,
/// malformed exponents, unknown and near-miss names, and stray characters mixed in.
/// </summary>
internal static class EquationGen
{
    private static readonly Gen<string> PlainNumber = Gen.Frequency(
        (5, Gen.Int[1, 9].Select(i => i.ToString(CultureInfo.InvariantCulture))),
        (2, Gen.Double[0.01, 10].Select(d => d.ToString("R", CultureInfo.InvariantCulture))));

    private static readonly Gen<string> PlainExponent = Gen.Int[0, 4].Select(i => i.ToString(CultureInfo.InvariantCulture));

    private static readonly Gen<string> PlainOperator = Gen.OneOf(" + ", " - ", "*", "+", "-", " * ");

    private static readonly Gen<string> OddNumber = Gen.Frequency(
        (5, Gen.Int[0, 9].Select(i => i.ToString(CultureInfo.InvariantCulture))),
        (3, Gen.Double[-10, 10].Select(d => Math.Abs(d).ToString("R", CultureInfo.InvariantCulture))),
        (2, Gen.OneOf(
            "0.5", ".5", "1e-3", "1E3", "2.5e+2", "1e308", "1e309", "4.9e-324", "1e-400", "0", "00", "007", "1.", "1e",
            "0.0", "1e-320", "123456789012345678901234567890")));

    private static readonly Gen<string> OddExponent = Gen.Frequency(
        (10, Gen.Int[0, 4].Select(i => i.ToString(CultureInfo.InvariantCulture))),
        (2, Gen.OneOf("8", "16", "31", "32", "33")),
        (1, Gen.OneOf("99999999999", "2147483648", "-1", "2.5", "1e2", "", "x", "(2)", "0032")));

    private static readonly Gen<string> OddOperator = Gen.Frequency(
        (6, Gen.OneOf(" + ", " - ", "*", "+", "-", " * ")),
        (2, Gen.OneOf("/", " / ")),
        (1, Gen.OneOf("^", "**", "", " ", ",", "//", "+-", "×")));

    private static readonly Gen<string> Stray = Gen.OneOf(
        "é", "²", "\u00a0", "\u200b", "\u0000", "#", "$", "!", "=", "[", "]", "{", "'", "\"", "\\", "\t", "\n", "(", ")");

    /// <summary>
    /// An equation over <paramref name="names"/> (which may include names the family does not define); a plain one
    /// uses only small numbers, exponents and the four operators, so that most plain equations are valid.
    /// </summary>
    public static Gen<string> Expression(IReadOnlyList<string> names, bool plain)
    {
        var name = Gen.OneOf([.. names]);
        var atom = plain ? Gen.Frequency((3, name), (1, PlainNumber)) : Gen.Frequency((8, name), (5, OddNumber), (1, Stray));
        var operators = plain ? PlainOperator : OddOperator;
        var exponents = plain ? PlainExponent : OddExponent;
        return Gen.Recursive<string>((depth, self) => depth >= 6
            ? atom
            : Gen.Frequency(
                (3, atom),
                (6, Gen.Select(self, operators, self, (a, op, b) => a + op + b)),
                (2, self.Select(a => "(" + a + ")")),
                (1, self.Select(a => "-" + a)),
                (3, Gen.Select(name, exponents, (a, k) => a + "^" + k)),
                (1, Gen.Select(self, exponents, (a, k) => "(" + a + ")^" + k)),
                (1, Gen.Select(self, Gen.Int[1, 4], (a, k) => string.Join("*", Enumerable.Repeat("(" + a + ")", k))))));
    }
}
