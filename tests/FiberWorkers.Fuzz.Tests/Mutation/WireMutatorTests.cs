namespace FiberWorkers.Fuzz.Tests.Mutation;

/// <summary>The wire-format helpers the decoding mutations rely on.</summary>
public sealed class WireMutatorTests
{
    [Theory]
    [InlineData(1, 0)]
    [InlineData(3, 5)]
    [InlineData(1000, 7)]
    [InlineData(10_000, 200)]
    public void A_self_nested_field_peels_level_by_level_down_to_its_payload(int depth, int payloadLength)
    {
        var payload = Enumerable.Range(0, payloadLength).Select(i => (byte)i).ToArray();

        var bytes = WireMutator.SelfNested(payload, 2, depth);

        for (var level = 0; level < depth; level++)
        {
            var field = Assert.Single(WireMutator.Fields(bytes));
            Assert.Equal((2, bytes.Length), (field.WireType, field.PayloadEnd));
            Assert.Equal(WireMutator.Varint((2 << 3) | 2), bytes[..field.TagEnd]);
            bytes = bytes[field.PayloadStart..];
        }

        Assert.Equal(payload, bytes);
    }

    [Theory]
    [InlineData(0UL, new byte[] { 0x00 })]
    [InlineData(300UL, new byte[] { 0xAC, 0x02 })]
    [InlineData(ulong.MaxValue, new byte[] { 0xFF, 0xFF, 0xFF, 0xFF, 0xFF, 0xFF, 0xFF, 0xFF, 0xFF, 0x01 })]
    public void Varints_are_written_as_the_protobuf_encoding_guide_gives_them(ulong value, byte[] expected) =>
        Assert.Equal(expected, WireMutator.Varint(value));
}
