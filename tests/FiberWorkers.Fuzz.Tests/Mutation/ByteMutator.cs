using System.Text.RegularExpressions;
using FiberWorkers.Solving.Randomness;

namespace FiberWorkers.Fuzz.Tests.Mutation;

/// <summary>
/// Byte-level mutations that know nothing of the format: bit flips, interesting bytes, insertions, deletions,
/// duplications, truncation, splices and token swaps with another input, invalid UTF-8, byte-order marks and raw
/// control characters.
/// </summary>
internal static partial class ByteMutator
{
    private static readonly byte[] InterestingBytes =
        [0x00, 0x01, 0x7F, 0x80, 0xFF, 0xC0, 0xC1, 0xED, 0xF4, 0xF5, (byte)'"', (byte)'\\', (byte)'{', (byte)'}', (byte)'[',
         (byte)']', (byte)',', (byte)':', (byte)'-', (byte)'e', (byte)'.', (byte)'0', (byte)'9', (byte)'^', (byte)'(', (byte)')'];

    // Overlong, surrogate, truncated, out-of-range and stray continuation sequences, plus the UTF-16 byte-order marks.
    private static readonly byte[][] InvalidUtf8 =
    [
        [0xC0, 0xAF], [0xC1, 0xBF], [0xE0, 0x80, 0xAF], [0xED, 0xA0, 0x80], [0xED, 0xBF, 0xBF], [0xE2, 0x82], [0xF5],
        [0xFF], [0xFE], [0x80], [0xBF], [0xF4, 0x90, 0x80, 0x80], [0xF0, 0x9F, 0x98], [0xF8, 0x88, 0x80, 0x80, 0x80],
        [0xFF, 0xFE], [0xFE, 0xFF], [0xC3],
    ];

    private static readonly byte[] Bom = [0xEF, 0xBB, 0xBF];

    // Repetitions stay below this many bytes: past the reader's size limit there is nothing more to find.
    private const long MaxGrowth = 1 << 20;

    /// <summary>Applies one random byte-level mutation, possibly using <paramref name="donor"/> (another input).</summary>
    public static byte[] Mutate(byte[] input, SeededRandom random, byte[] donor)
    {
        var data = new List<byte>(input);
        switch (random.NextInt(13))
        {
            case 0:
                for (var k = random.Between(1, 8); k > 0 && data.Count > 0; k--)
                {
                    var at = random.NextInt(data.Count);
                    data[at] ^= (byte)(1 << random.NextInt(8));
                }

                break;
            case 1:
                if (data.Count > 0)
                {
                    data[random.NextInt(data.Count)] = random.Pick(InterestingBytes);
                }

                break;
            case 2:
                var inserted = new byte[random.SkewedLength(32)];
                for (var i = 0; i < inserted.Length; i++)
                {
                    inserted[i] = (byte)random.NextInt(256);
                }

                data.InsertRange(random.NextInt(data.Count + 1), inserted);
                break;
            case 3:
                if (data.Count > 0)
                {
                    var at = random.NextInt(data.Count);
                    data.RemoveRange(at, Math.Min(data.Count - at, random.SkewedLength(data.Count)));
                }

                break;
            case 4:
                if (data.Count > 0)
                {
                    var at = random.NextInt(data.Count);
                    var length = Math.Min(data.Count - at, random.SkewedLength(data.Count));
                    var copies = random.Chance(0.2) && length * 64L < MaxGrowth ? random.Between(2, 64) : 1;
                    var range = data.GetRange(at, length);
                    for (var c = 0; c < copies; c++)
                    {
                        data.InsertRange(random.NextInt(data.Count + 1), range);
                    }
                }

                break;
            case 5:
                data = data.GetRange(0, random.NextInt(data.Count + 1));
                break;
            case 6:
                if (donor.Length > 0)
                {
                    var from = random.NextInt(donor.Length);
                    var piece = donor.AsSpan(from, Math.Min(donor.Length - from, random.SkewedLength(donor.Length))).ToArray();
                    var at = random.NextInt(data.Count + 1);
                    data.RemoveRange(at, Math.Min(data.Count - at, random.SkewedLength(Math.Max(1, piece.Length))));
                    data.InsertRange(at, piece);
                }

                break;
            case 7:
                data.InsertRange(random.NextInt(data.Count + 1), random.Pick(InvalidUtf8));
                break;
            case 8:
                var bomAt = random.Chance(0.6) ? 0 : random.NextInt(data.Count + 1);
                data.InsertRange(bomAt, random.Chance(0.2) ? [.. Bom, .. Bom] : Bom);
                break;
            case 9:
                data.Insert(random.NextInt(data.Count + 1), random.Chance(0.8) ? (byte)random.NextInt(0x20) : (byte)0x7F);
                break;
            case 10:
            case 11:
                return SwapToken(input, random, donor);
            default:
                // A quote or bracket more or less: the classic way to turn a value into a key or a string into code.
                byte[] structural = [(byte)'"', (byte)'[', (byte)']', (byte)'{', (byte)'}', (byte)',', (byte)':'];
                var where = random.NextInt(data.Count + 1);
                if (random.Chance(0.5) || data.Count == 0)
                {
                    data.Insert(where, random.Pick(structural));
                }
                else
                {
                    data.RemoveAt(Math.Min(where, data.Count - 1));
                }

                break;
        }

        return [.. data];
    }

    /// <summary>Replaces one token of <paramref name="input"/> (string, number, word or punctuation) by one of <paramref name="donor"/>.</summary>
    public static byte[] SwapToken(byte[] input, SeededRandom random, byte[] donor)
    {
        var text = System.Text.Encoding.Latin1.GetString(input);
        var tokens = TokenPattern().Matches(text);
        var donorTokens = TokenPattern().Matches(System.Text.Encoding.Latin1.GetString(donor));
        if (tokens.Count == 0 || donorTokens.Count == 0)
        {
            return input;
        }

        var target = tokens[random.NextInt(tokens.Count)];
        var replacement = donorTokens[random.NextInt(donorTokens.Count)].Value;
        var result = string.Concat(text.AsSpan(0, target.Index), replacement, text.AsSpan(target.Index + target.Length));
        return System.Text.Encoding.Latin1.GetBytes(result);
    }

    [GeneratedRegex("\"(?:[^\"\\\\]|\\\\.)*\"|-?[0-9][0-9.eE+-]*|[A-Za-z_][A-Za-z0-9_]*|[^\\s]")]
    private static partial Regex TokenPattern();
}
