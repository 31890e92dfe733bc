using FiberWorkers.Algebra.Families;
using FiberWorkers.Contracts.V1;
using FiberWorkers.Testing;
using Google.Protobuf;

namespace FiberWorkers.Algebra.Tests.Families;

public sealed class FamilyRoundTripTests
{
    public static TheoryData<string> Examples => [.. TestFamilies.ExampleNames];

    [Theory]
    [MemberData(nameof(Examples))]
    public void Proto3_json_round_trip_of_a_family_file_is_lossless(string example)
    {
        var family = TestFamilies.Example(example);
        var json = JsonFormatter.Default.Format(family.Message);
        var again = FamilyReader.Parse(json, "round-trip.json");
        Assert.Equal(family.Message, again.Message);
        Assert.Equal(family.ContentHash, again.ContentHash);
        Assert.Equal(family.Message, Family.Parser.ParseJson(json));
    }

    [Fact]
    public void Round_trip_keeps_the_root_count_hint_and_binary_form_too()
    {
        var family = TestFamilies.Build("hinted", ["x"], ["x^3 - p"], [("p", 0.5, 2)], rootCount: 3);
        Assert.Equal(3, family.RootCount);
        var json = JsonFormatter.Default.Format(family.Message);
        Assert.Contains("\"rootCount\": 3", json, StringComparison.Ordinal);
        var fromBinary = Family.Parser.ParseFrom(family.Message.ToByteArray());
        Assert.Equal(family.Message, fromBinary);
        Assert.Equal(family.ContentHash, FamilyReader.FromMessage(fromBinary, "binary").ContentHash);
    }

    [Fact]
    public void Content_hash_ignores_names_of_constants_and_spelling_but_not_the_box()
    {
        var a = TestFamilies.Build("one", ["x"], ["x^2 - 2*k*x + 1"], [("k", 0, 1)]);
        var b = TestFamilies.Build("other name", ["x"], ["(x - k)^2 + 1 - k^2"], [("k", 0, 1)]);
        var c = TestFamilies.Build("one", ["x"], ["x^2 - 2*k*x + 1"], [("k", 0, 2)]);
        var d = TestFamilies.Build("one", ["x"], ["x^2 - two*k*x + 1"], [("k", 0, 1)], new Dictionary<string, double> { ["two"] = 2 });
        Assert.Equal(a.ContentHash, b.ContentHash);
        Assert.Equal(a.ContentHash, d.ContentHash);
        Assert.NotEqual(a.ContentHash, c.ContentHash);
    }
}
