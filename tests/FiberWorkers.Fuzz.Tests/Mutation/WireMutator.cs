using FiberWorkers.Solving.Randomness;

namespace FiberWorkers.Fuzz.Tests.Mutation;

/// <summary>
/// Mutations that know the protobuf wire format: corrupted length prefixes (huge, negative, one off), changed tags
/// and wire types (including the invalid ones and field number 0), overlong varints, deep nests of groups and of
/// length-delimited fields, merges of two encodings (of the same or another message) and appended unknown fields.
/// </summary>
internal static class WireMutator
{
    private static readonly int[] NestingDepths = [2, 50, 99, 100, 101, 1000, 10_000];

    /// <summary>Applies one mutation to <paramref name="input"/>, possibly using <paramref name="donor"/> (another valid encoding).</summary>
    public static byte[] Mutate(byte[] input, SeededRandom random, byte[] donor)
    {
        var fields = Fields(input);
        switch (random.NextInt(11))
        {
            case 0:
            case 1:
                return ByteMutator.Mutate(input, random, donor);
            case 2:
                var delimited = fields.Where(f => f.WireType == 2).ToList();
                if (delimited.Count == 0)
                {
                    goto case 8;
                }

                var field = random.Pick(delimited);
                var length = field.PayloadEnd - field.PayloadStart;
                ulong[] lengths = [uint.MaxValue, int.MaxValue, (ulong)length + 1, (ulong)Math.Max(0, length - 1), ulong.MaxValue, 1UL << 31, 0];
                return [.. input.AsSpan(0, field.TagEnd), .. Varint(random.Pick(lengths)), .. input.AsSpan(field.PayloadStart)];
            case 3:
                if (fields.Count == 0)
                {
                    goto case 8;
                }

                var retagged = random.Pick(fields);
                int[] numbers = [0, 1, 2, 3, 7, 15, 16, 19000, 19999, 536_870_911, random.Between(1, 40)];
                var tag = ((ulong)(uint)random.Pick(numbers) << 3) | (uint)(random.Chance(0.5) ? random.NextInt(8) : retagged.WireType);
                return [.. input.AsSpan(0, retagged.Start), .. Varint(tag), .. input.AsSpan(retagged.TagEnd)];
            case 4:
                // Varints of 10 and 11 bytes: the longest legal one and one byte past it.
                byte[] overlong = random.Chance(0.5)
                    ? [0x08, 0xFF, 0xFF, 0xFF, 0xFF, 0xFF, 0xFF, 0xFF, 0xFF, 0xFF, 0x01]
                    : [0x08, 0x80, 0x80, 0x80, 0x80, 0x80, 0x80, 0x80, 0x80, 0x80, 0x80, 0x00];
                var at = random.Chance(0.5) || fields.Count == 0 ? input.Length : random.Pick(fields).Start;
                return [.. input.AsSpan(0, at), .. overlong, .. input.AsSpan(at)];
            case 5:
                var groups = random.Pick(NestingDepths);
                var fieldNumber = (ulong)random.Between(1, 20);
                var open = Varint((fieldNumber << 3) | 3);
                var close = Varint((fieldNumber << 3) | 4);
                var nested = new List<byte>(input);
                for (var i = 0; i < groups; i++)
                {
                    nested.AddRange(open);
                }

                if (random.Chance(0.7))
                {
                    for (var i = 0; i < groups; i++)
                    {
                        nested.AddRange(close);
                    }
                }

                return [.. nested];
            case 6:
                // A length-delimited field holding itself, many levels deep: a message field recurses into its
                // parser, an unknown one is skipped.
                return SelfNested(random.Chance(0.5) ? [] : input, (ulong)random.Between(1, 4), random.Pick(NestingDepths));
            case 7:
                return random.Chance(0.5) ? [.. input, .. input] : [.. input, .. donor];
            case 8:
                var wireType = random.NextInt(6);
                var unknownTag = Varint(((ulong)(uint)random.Between(20, 5000) << 3) | (uint)wireType);
                byte[] value = wireType switch
                {
                    0 => Varint(random.NextUInt64()),
                    1 => BitConverter.GetBytes(random.NextUInt64()),
                    2 => [.. Varint(3), 1, 2, 3],
                    5 => BitConverter.GetBytes((uint)random.NextUInt64()),
                    _ => [],
                };
                return [.. input, .. unknownTag, .. value];
            case 9:
                var noise = new byte[random.SkewedLength(256)];
                for (var i = 0; i < noise.Length; i++)
                {
                    noise[i] = (byte)random.NextInt(256);
                }

                return noise;
            default:
                var cut = random.Chance(0.5) && fields.Count > 0 ? random.Pick(fields).PayloadEnd - 1 : random.NextInt(input.Length + 1);
                return input[..Math.Max(0, cut)];
        }
    }

    /// <summary>
    /// Field <paramref name="number"/> holding field <paramref name="number"/> ... <paramref name="depth"/> levels
    /// deep around <paramref name="payload"/>; written outside in from the lengths, in time linear in the result.
    /// </summary>
    internal static byte[] SelfNested(byte[] payload, ulong number, int depth)
    {
        var tag = Varint((number << 3) | 2);
        var lengths = new long[depth];
        var length = (long)payload.Length;
        for (var level = depth - 1; level >= 0; level--)
        {
            lengths[level] = length;
            length += tag.Length + Varint((ulong)length).Length;
        }

        var output = new List<byte>((int)length);
        for (var level = 0; level < depth; level++)
        {
            output.AddRange(tag);
            output.AddRange(Varint((ulong)lengths[level]));
        }

        output.AddRange(payload);
        return [.. output];
    }

    /// <summary>The top-level fields of an encoding, as far as they can be read.</summary>
    internal static List<WireField> Fields(byte[] input)
    {
        var fields = new List<WireField>();
        var position = 0;
        while (position < input.Length)
        {
            var start = position;
            if (!TryReadVarint(input, ref position, out var tag))
            {
                break;
            }

            var tagEnd = position;
            var wireType = (int)(tag & 7);
            var payloadStart = position;
            switch (wireType)
            {
                case 0:
                    if (!TryReadVarint(input, ref position, out _))
                    {
                        return fields;
                    }

                    break;
                case 1:
                    position += 8;
                    break;
                case 2:
                    if (!TryReadVarint(input, ref position, out var length) || length > (ulong)(input.Length - position))
                    {
                        return fields;
                    }

                    payloadStart = position;
                    position += (int)length;
                    break;
                case 5:
                    position += 4;
                    break;
                default:
                    return fields;
            }

            if (position > input.Length)
            {
                break;
            }

            fields.Add(new WireField(start, tagEnd, payloadStart, position, wireType));
        }

        return fields;
    }

    internal static byte[] Varint(ulong value)
    {
        var bytes = new List<byte>(10);
        do
        {
            var b = (byte)(value & 0x7F);
            value >>= 7;
            bytes.Add(value != 0 ? (byte)(b | 0x80) : b);
        }
        while (value != 0);

        return [.. bytes];
    }

    private static bool TryReadVarint(byte[] input, ref int position, out ulong value)
    {
        value = 0;
        for (var shift = 0; shift < 64 && position < input.Length; shift += 7)
        {
            var b = input[position++];
            value |= (ulong)(b & 0x7F) << shift;
            if (b < 0x80)
            {
                return true;
            }
        }

        return false;
    }

    /// <summary>One field: where its tag starts and ends, where its payload starts and ends, its wire type.</summary>
    internal readonly record struct WireField(int Start, int TagEnd, int PayloadStart, int PayloadEnd, int WireType);
}
