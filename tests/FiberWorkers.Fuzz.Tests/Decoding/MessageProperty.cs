using System.Buffers;
using FiberWorkers.Fuzz.Tests.Engine;
using FiberWorkers.Fuzz.Tests.Mutation;
using FiberWorkers.Solving.Randomness;
using Google.Protobuf;

namespace FiberWorkers.Fuzz.Tests.Decoding;

/// <summary>
/// The property of wire decoding: bytes either decode or raise <see cref="InvalidProtocolBufferException"/>, the
/// same whether they arrive as one buffer or in segments (as gRPC hands them over); what decodes encodes to
/// bytes that decode to an equal message of the computed size, prints (as logs do), and passes or is rejected
/// properly by the target's validator.
/// </summary>
internal static class MessageProperty
{
    public static string Check(MessageFuzzTarget target, byte[] bytes)
    {
        var (whole, wholeError) = Decode(() => target.Parser.ParseFrom(bytes));
        var (pieces, piecesError) = Decode(() => target.Parser.ParseFrom(Segmented(bytes)));
        if ((wholeError is null) != (piecesError is null))
        {
            throw new FuzzViolation(
                $"one buffer {(wholeError is null ? "decodes" : "fails")} but segments {(piecesError is null ? "decode" : "fail")}: "
                + $"{wholeError?.Message ?? piecesError?.Message}");
        }

        if (whole is null)
        {
            return "rejected";
        }

        if (!whole.Equals(pieces))
        {
            throw new FuzzViolation("one buffer and segments decode to different messages");
        }

        var encoded = whole.ToByteArray();
        if (whole.CalculateSize() != encoded.Length)
        {
            throw new FuzzViolation($"CalculateSize {whole.CalculateSize()} but {encoded.Length} bytes written");
        }

        if (!target.Parser.ParseFrom(encoded).Equals(whole))
        {
            throw new FuzzViolation("a decoded message changed when encoded and decoded again");
        }

        _ = whole.ToString();
        if (target.Validate is { } validate)
        {
            try
            {
                validate(whole);
            }
            catch (Exception e) when (MessageFuzzTarget.IsRejection(e))
            {
                return "decoded, rejected by the validator";
            }

            return "decoded, accepted by the validator";
        }

        return "decoded";
    }

    /// <summary>A mutant of one of the target's samples (sometimes spliced with another target's).</summary>
    public static byte[] Mutant(MessageFuzzTarget target, SeededRandom random)
    {
        var bytes = random.Pick(target.Samples).ToByteArray();
        var others = DecodingTargets.All;
        var donorTarget = random.Chance(0.7) ? target : random.Pick(others);
        var donor = random.Pick(donorTarget.Samples).ToByteArray();
        for (var k = random.Between(1, 3); k > 0; k--)
        {
            bytes = WireMutator.Mutate(bytes, random, donor);
        }

        return bytes;
    }

    private static (IMessage? Message, InvalidProtocolBufferException? Error) Decode(Func<IMessage> decode)
    {
        try
        {
            return (decode(), null);
        }
        catch (InvalidProtocolBufferException e)
        {
            return (null, e);
        }
    }

    /// <summary>The bytes in up to four segments, split at points that depend only on the bytes (so a finding replays).</summary>
    private static ReadOnlySequence<byte> Segmented(byte[] bytes)
    {
        if (bytes.Length < 2)
        {
            return new ReadOnlySequence<byte>(bytes);
        }

        var hash = 0xCBF29CE484222325UL;
        foreach (var b in bytes)
        {
            hash = (hash ^ b) * 0x100000001B3UL;
        }

        var random = new SeededRandom(hash);
        var cuts = Enumerable.Range(0, random.Between(1, 3)).Select(_ => random.Between(1, bytes.Length - 1)).Distinct().Order().ToArray();
        Segment? first = null;
        Segment? last = null;
        var start = 0;
        foreach (var end in cuts.Append(bytes.Length))
        {
            var segment = new Segment(bytes.AsMemory(start, end - start), last);
            first ??= segment;
            last = segment;
            start = end;
        }

        return new ReadOnlySequence<byte>(first!, 0, last!, last!.Memory.Length);
    }

    private sealed class Segment : ReadOnlySequenceSegment<byte>
    {
        public Segment(ReadOnlyMemory<byte> memory, Segment? previous)
        {
            Memory = memory;
            if (previous is not null)
            {
                RunningIndex = previous.RunningIndex + previous.Memory.Length;
                previous.Next = this;
            }
        }
    }
}
