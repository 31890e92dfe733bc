using System.Text;
using FiberWorkers.Solving.Randomness;

namespace FiberWorkers.Fuzz.Tests.Mutation;

/// <summary>
/// Values that have broken readers before: numbers beyond double range or below its precision, negative zero,
/// NaN and infinity spelled in JSON and as strings, integers past 32 and 64 bits, identifiers that are long or not
/// ASCII, control and format characters, lone surrogates, and equation fragments at and past every parser limit.
/// </summary>
internal static class OddValues
{
    /// <summary>JSON values as raw text (some deliberately not valid JSON).</summary>
    public static readonly string[] JsonScalars =
    [
        "1e309", "-1e309", "1e-400", "-0", "-0.0", "0e0", "4.9e-324", "5e-324", "2.2250738585072014e-308",
        "1.7976931348623157e308", "1.7976931348623159e308", "1e+99999999999", "2147483647", "2147483648",
        "-2147483648", "-2147483649", "4294967296", "9223372036854775807", "9223372036854775808", "18446744073709551616",
        "1" + new string('0', 400), "0." + new string('0', 400) + "1", "1.5", "-1", "0", "1", "2", "1.0", "1e0", "3e1",
        "NaN", "Infinity", "-Infinity", "\"NaN\"", "\"Infinity\"", "\"-Infinity\"", "\"1.5\"", "\"1e309\"", "\"2\"",
        "true", "false", "null", "[]", "{}", "\"\"", "\" \"", "01", "+1", ".5", "1.", "0x10", "-", "1e", "[1]", "[[1]]",
        "{\"name\":\"p\",\"low\":0,\"high\":1}", "[\"x\"]", "[\"x\",\"x\"]", "[\"\"]", "[null]", "[1,2]", "\"x\"",
    ];

    /// <summary>String contents (decoded; encoded later with or without \u escapes).</summary>
    public static readonly string[] StringContents =
    [
        "", " ", "\t", "x", "y", "p", "_", "__", "x1", "X", "NaN", "Infinity", "e", "E", "1x", "x y", "x-y", "x.y",
        "é", "α", "ｘ", "x\u0301", "\u200b", "\u00a0x", "\ufeff", "x\u0000", "\u001f", "\ud800", "\udc00x",
        "\ud83d\ude00", "\u202e", "\\", "\"", "\u2028", "\u0085", "x\r\ny", "unknown", "low", "high", "name",
        "x^2 - 1", "x*y - p", "1/0", "x/y", "x^99999999999", "-", "(", ")", "x^", "^2", "((x)", "x))",
    ];

    /// <summary>Fragments to splice into equation text.</summary>
    public static readonly string[] ExpressionFragments =
    [
        "^99999999999", "^2147483648", "^2147483647", "^-1", "^2.5", "^1e2", "^", "^^2", "^2^3", "^ 33", "^32", "^33",
        "^0", "^00000000000000000000032", "^ ", "1e309", "1e-400", "4.9e-324", "1.", ".", "1e", "1e+", "0x1F", "1_000",
        "\u0661\u0662", "1,5", "**", "//", "+-", "--", "/0", "/(1-1)", "/1e-320", "/1e-310", "/x", "/p", "/(x-x)",
        "²", "√", "×", "\u2212", "\u00a0", "\u200b", "\u0000", "\t", "\n", "(", ")", "()", "(()", " x ", "*0", "-0",
        "+0*x", "*1e308*1e308", "*1e200*1e200", "-1e308-1e308", "*(1e308+1e308)", "e", "E", "E5", "1E5", ".5e-3",
    ];

    /// <summary>An odd string content, sometimes a very long identifier.</summary>
    public static string StringContent(SeededRandom random) =>
        random.Chance(0.15) ? LongIdentifier(random) : random.Pick(StringContents);

    /// <summary>An identifier of 60 to 100,000 characters (names are limited to 64).</summary>
    public static string LongIdentifier(SeededRandom random)
    {
        int[] lengths = [63, 64, 65, 200, 5000, 100_000];
        var length = random.Pick(lengths);
        var text = new StringBuilder(length);
        text.Append('x');
        while (text.Length < length)
        {
            text.Append((char)('a' + random.NextInt(26)));
        }

        return text.ToString();
    }

    /// <summary>
    /// A JSON string literal for <paramref name="content"/> in a random style: escaped minimally, or with every non-ASCII character
    /// as \uXXXX, or with raw control characters left in (invalid JSON). Lone surrogates are always escaped, as
    /// UTF-8 cannot carry them.
    /// </summary>
    public static string JsonString(string content, SeededRandom random) => JsonString(content, random.NextInt(8));

    /// <summary>
    /// <see cref="JsonString(string, SeededRandom)"/> in a given style: 0 leaves control characters raw, 1 escapes
    /// all non-ASCII in lower-case hex, 2 escapes lone surrogates in upper-case hex, others escape minimally.
    /// </summary>
    public static string JsonString(string content, int style)
    {
        var text = new StringBuilder(content.Length + 2);
        text.Append('"');
        for (var i = 0; i < content.Length; i++)
        {
            var c = content[i];
            var pairedSurrogate = char.IsSurrogatePair(content, i);
            if (c == '"' || c == '\\')
            {
                text.Append('\\').Append(c);
            }
            else if (c < 0x20 && style != 0)
            {
                text.Append(c switch
                {
                    '\n' => "\\n",
                    '\t' => "\\t",
                    '\r' => "\\r",
                    '\b' => "\\b",
                    '\f' => "\\f",
                    _ => $"\\u{(int)c:x4}",
                });
            }
            else if ((char.IsSurrogate(c) && !pairedSurrogate) || (c > 0x7E && style == 1))
            {
                text.Append(style == 2 ? $"\\u{(int)c:X4}" : $"\\u{(int)c:x4}");
            }
            else if (pairedSurrogate)
            {
                text.Append(c).Append(content[++i]);
            }
            else
            {
                text.Append(c);
            }
        }

        return text.Append('"').ToString();
    }
}
