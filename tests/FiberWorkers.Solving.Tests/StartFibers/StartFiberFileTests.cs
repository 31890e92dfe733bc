using System.Numerics;
using System.Text;
using System.Text.Json.Nodes;
using FiberWorkers.Algebra.Families;
using FiberWorkers.Solving.Fibers;
using FiberWorkers.Solving.StartFibers;
using FiberWorkers.Solving.Tests.References;
using FiberWorkers.Testing;

namespace FiberWorkers.Solving.Tests.StartFibers;

/// <summary>The start-fiber file format: exact round trips and located errors for every kind of bad input.</summary>
public sealed class StartFiberFileTests : IDisposable
{
    private readonly string _directory = Directory.CreateTempSubdirectory("start-fiber-tests-").FullName;

    public void Dispose() => Directory.Delete(_directory, recursive: true);

    [Fact]
    public void Save_then_load_preserves_every_field_bit_for_bit()
    {
        var (family, solver, fiber) = Microgrid3();
        var path = Path.Combine(_directory, "microgrid3.start.json");

        StartFiberFile.Save(fiber, path);
        var loaded = StartFiberFile.Load(path, family.ContentHash);

        AssertSameFiber(fiber, loaded);
        Assert.False(File.Exists(path + ".tmp"));
        // The loaded fiber drives the parameter homotopy exactly as the original does.
        Complex[] target = [0.35, -0.8];
        var fromOriginal = solver.Solve(fiber, target).Solutions.Select(s => s.Values).ToArray();
        var fromLoaded = solver.Solve(loaded, target).Solutions.Select(s => s.Values).ToArray();
        Assert.Equal(fromOriginal.Length, fromLoaded.Length);
        for (var i = 0; i < fromOriginal.Length; i++)
        {
            Assert.Equal(fromOriginal[i], fromLoaded[i]);
        }
    }

    [Fact]
    public void Serialize_then_deserialize_keeps_awkward_doubles_exactly()
    {
        // Values that a careless number format would round: subnormals, ±0, huge and tiny magnitudes, 0.1.
        var fiber = new StartFiber(
            "hash-of-our-own",
            ["u", "v"],
            [new Complex(double.Epsilon, -0.0), new Complex(0.1, 1e300)],
            [[new Complex(-1e-310, 123456789.123456789), new Complex(Math.PI, -Math.E)], [Complex.Zero, new Complex(2.0 / 3, 1e-17)]],
            new StartFiberProvenance("total-degree", ulong.MaxValue, long.MaxValue, "homotopy", "note with \"quotes\" and ünïcode"));

        var loaded = StartFiberFile.Deserialize(StartFiberFile.Serialize(fiber), "memory");

        AssertSameFiber(fiber, loaded);
        Assert.True(double.IsNegative(loaded.Parameters[0].Imaginary), "−0 must stay −0");
    }

    [Fact]
    public void Loading_with_another_familys_hash_is_refused_at_familyHash()
    {
        var (_, _, fiber) = Microgrid3();
        var other = TestFamilies.Example("microgrid4");

        var error = Assert.Throws<InputException>(() => StartFiberFile.Deserialize(StartFiberFile.Serialize(fiber), "m3.json", other.ContentHash));

        AssertProblem(error, "m3.json", "familyHash");
    }

    [Theory]
    [InlineData("format", "\"fiberworkers.family\"", "format")]
    [InlineData("format", "7", "format")]
    [InlineData("version", "2", "version")]
    [InlineData("version", "\"1\"", "version")]
    [InlineData("version", "1.5", "version")]
    [InlineData("unknowns", "\"c2\"", "unknowns")]
    [InlineData("parameters", "[[1, 0], [2]]", "parameters[1]")]
    [InlineData("parameters", "[[1, 0], [\"2\", 0]]", "parameters[1]")]
    [InlineData("parameters", "[[1, 0], [2, 0, 0]]", "parameters[1]")]
    [InlineData("parameters", "{}", "parameters")]
    [InlineData("solutions", "[[[1, 0], [0, 0], [1, 0], [0, 0]], [[1, 0], [0, 0], [1, 0], 5]]", "solutions[1][3]")]
    [InlineData("solutions", "[[[1, 0], [0, 0], [1, 0]]]", "solutions[0]")]
    [InlineData("solutions", "[[[1, 0], [0, 0], [1, 0], [0, 0], [9, 9]]]", "solutions[0]")]
    [InlineData("solutions", "[[[1, 0], [0, 0], [1, 0], [1e999, 0]]]", "solutions[0][3]")]
    public void A_bad_field_is_reported_with_its_location(string field, string replacementJson, string location)
    {
        var (_, _, fiber) = Microgrid3();
        var document = JsonNode.Parse(StartFiberFile.Serialize(fiber))!.AsObject();
        document[field] = JsonNode.Parse(replacementJson);

        var error = Assert.Throws<InputException>(() => StartFiberFile.Deserialize(Encoding.UTF8.GetBytes(document.ToJsonString()), "bad.json"));

        AssertProblem(error, "bad.json", location);
    }

    [Theory]
    [InlineData("format")]
    [InlineData("version")]
    [InlineData("familyHash")]
    [InlineData("provenance")]
    [InlineData("unknowns")]
    [InlineData("parameters")]
    [InlineData("solutions")]
    public void A_missing_field_is_named(string field)
    {
        var (_, _, fiber) = Microgrid3();
        var document = JsonNode.Parse(StartFiberFile.Serialize(fiber))!.AsObject();
        document.Remove(field);

        var error = Assert.Throws<InputException>(() => StartFiberFile.Deserialize(Encoding.UTF8.GetBytes(document.ToJsonString()), "bad.json"));

        AssertProblem(error, "bad.json", field);
        Assert.Contains(field, error.Problems[0].Message, StringComparison.Ordinal);
    }

    [Theory]
    [InlineData("seed", "-3")]
    [InlineData("seed", "\"3\"")]
    [InlineData("pathsTracked", "2.5")]
    [InlineData("pathsTracked", "null")]
    public void A_bad_provenance_number_is_reported_inside_provenance(string field, string replacementJson)
    {
        var (_, _, fiber) = Microgrid3();
        var document = JsonNode.Parse(StartFiberFile.Serialize(fiber))!.AsObject();
        document["provenance"]![field] = JsonNode.Parse(replacementJson);

        var error = Assert.Throws<InputException>(() => StartFiberFile.Deserialize(Encoding.UTF8.GetBytes(document.ToJsonString()), "bad.json"));

        AssertProblem(error, "bad.json", $"provenance.{field}");
    }

    [Fact]
    public void A_truncated_file_is_refused_with_the_line_and_column_where_it_ends()
    {
        var (_, _, fiber) = Microgrid3();
        var bytes = StartFiberFile.Serialize(fiber);
        var path = Path.Combine(_directory, "truncated.json");
        File.WriteAllBytes(path, bytes[..(bytes.Length * 2 / 3)]);
        var lines = Encoding.UTF8.GetString(bytes[..(bytes.Length * 2 / 3)]).Split('\n').Length;

        var error = Assert.Throws<InputException>(() => StartFiberFile.Load(path));

        Assert.Equal("truncated.json", error.Problems[0].Source);
        Assert.Matches(@"^line \d+, column \d+$", error.Problems[0].Location);
        Assert.StartsWith($"line {lines},", error.Problems[0].Location, StringComparison.Ordinal);
    }

    [Theory]
    [InlineData("")]
    [InlineData("[1, 2, 3]")]
    [InlineData("\"fiberworkers.start-fiber\"")]
    public void Something_that_is_not_a_start_fiber_object_is_refused(string text)
    {
        var error = Assert.Throws<InputException>(() => StartFiberFile.Deserialize(Encoding.UTF8.GetBytes(text), "odd.json"));

        Assert.Equal("odd.json", error.Problems[0].Source);
        Assert.Contains("start fiber", error.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void A_missing_file_is_an_input_error_naming_it()
    {
        var path = Path.Combine(_directory, "absent.json");

        var error = Assert.Throws<InputException>(() => StartFiberFile.Load(path));

        Assert.Contains("absent.json", error.Message, StringComparison.Ordinal);
    }

    private static (FamilyDefinition Family, FiberSolver Solver, StartFiber Fiber) Microgrid3()
    {
        var family = TestFamilies.Example("microgrid3");
        var solver = new FiberSolver(family.System);
        return (family, solver, solver.CreateStartFiber(family.ContentHash, family.Parameters));
    }

    private static void AssertSameFiber(StartFiber expected, StartFiber actual)
    {
        Assert.Equal(expected.FamilyHash, actual.FamilyHash);
        Assert.Equal(expected.Unknowns, actual.Unknowns);
        Assert.Equal(expected.Provenance, actual.Provenance);
        Assert.Equal(expected.RootCount, actual.RootCount);
        AssertBits(expected.Parameters, actual.Parameters);
        for (var i = 0; i < expected.Solutions.Count; i++)
        {
            AssertBits(expected.Solutions[i], actual.Solutions[i]);
        }
    }

    private static void AssertBits(Complex[] expected, Complex[] actual)
    {
        Assert.Equal(expected.Length, actual.Length);
        for (var i = 0; i < expected.Length; i++)
        {
            Assert.Equal(BitConverter.DoubleToInt64Bits(expected[i].Real), BitConverter.DoubleToInt64Bits(actual[i].Real));
            Assert.Equal(BitConverter.DoubleToInt64Bits(expected[i].Imaginary), BitConverter.DoubleToInt64Bits(actual[i].Imaginary));
        }
    }

    private static void AssertProblem(InputException error, string source, string location)
    {
        var problem = Assert.Single(error.Problems);
        Assert.Equal(source, problem.Source);
        Assert.Equal(location, problem.Location);
        Assert.False(string.IsNullOrWhiteSpace(problem.Message));
    }
}
