using System.Text;
using System.Text.RegularExpressions;
using FiberWorkers.Solving.Randomness;

namespace FiberWorkers.Fuzz.Tests.Mutation;

/// <summary>
/// Mutations of equation text: odd fragments, nesting at and past the depth limit, chains of unary minus, huge and
/// malformed exponents, sums and products long enough to reach the node, term and degree limits, and renamed,
/// lengthened or non-ASCII names.
/// </summary>
internal static partial class ExpressionMutator
{
    private static readonly int[] NestingDepths = [1, 2, 100, 199, 200, 201, 1000, 50_000];

    private static readonly int[] ShrinkingOrSmall = [0, 3, 6, 7, 8];

    public static string Mutate(string expression, SeededRandom random)
    {
        // The growing mutations (nesting, long sums and products, doubling) are for expressions that are still
        // small; a mutant far past the file-size limit tests nothing the size check does not.
        var growing = expression.Length < 20_000;
        switch (growing ? random.NextInt(10) : random.Pick(ShrinkingOrSmall))
        {
            case 0:
                var at = random.NextInt(expression.Length + 1);
                return expression.Insert(at, random.Pick(OddValues.ExpressionFragments));
            case 1:
                var depth = random.Pick(NestingDepths);
                return new string('(', depth) + expression + new string(')', depth - (random.Chance(0.1) ? 1 : 0));
            case 2:
                var minus = random.Pick(NestingDepths);
                return random.Chance(0.5)
                    ? string.Concat(Enumerable.Repeat(random.Chance(0.5) ? "-" : "- ", minus)) + expression
                    : string.Concat(Enumerable.Repeat("-(", minus)) + expression + new string(')', minus);
            case 3:
                string[] exponents = ["^2", "^32", "^33", "^0", "^99999999999", "^16", "^-2", "^2.0"];
                return $"({expression}){random.Pick(exponents)}";
            case 4:
                int[] counts = [100, 5_000, 10_000, 20_001, 30_000];
                var names = Names(expression);
                var term = names.Count > 0 ? random.Pick(names) : "x";
                return string.Join(random.Chance(0.5) ? " + " : "+", Enumerable.Repeat(term, random.Pick(counts)));
            case 5:
                var factors = random.Between(2, 40);
                return string.Join("*", Enumerable.Repeat($"({expression})", factors));
            case 6:
                var tokens = NamePattern().Matches(expression);
                if (tokens.Count == 0)
                {
                    return expression + "*" + OddValues.StringContent(random);
                }

                var token = tokens[random.NextInt(tokens.Count)];
                string[] renames = ["X", "x1", "_", "é", "ｘ", "x\u0301", "NaN", "e", "E", "Infinity"];
                var replacement = random.Chance(0.3) ? OddValues.LongIdentifier(random) : random.Pick(renames);
                return string.Concat(expression.AsSpan(0, token.Index), replacement, expression.AsSpan(token.Index + token.Length));
            case 7:
                if (expression.Length == 0)
                {
                    return expression;
                }

                var from = random.NextInt(expression.Length);
                return expression.Remove(from, Math.Min(expression.Length - from, random.SkewedLength(8)));
            case 8:
                var text = new StringBuilder(expression);
                text.Insert(random.NextInt(text.Length + 1), (char)random.Between(0x20, 0x7E));
                return text.ToString();
            default:
                // The same expression twice, joined by an operator: doubles degrees, terms and nodes.
                string[] joins = ["*", "+", "-", "/", "^"];
                return $"({expression}){random.Pick(joins)}({expression})";
        }
    }

    private static List<string> Names(string expression) => [.. NamePattern().Matches(expression).Select(m => m.Value)];

    [GeneratedRegex("[A-Za-z_][A-Za-z0-9_]*")]
    private static partial Regex NamePattern();
}
