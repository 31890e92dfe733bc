using System.Text.Json;
using FiberWorkers.Testing;

namespace FiberWorkers.Cli.Tests.Commands;

public sealed class CheckCommandTests
{
    public static TheoryData<string> Examples => [.. TestFamilies.ExampleNames];

    [Theory]
    [MemberData(nameof(Examples))]
    public async Task Check_json_works_on_every_bundled_example(string example)
    {
        var (code, output, error) = await CliRunner.RunAsync("check", "--example", example, "--json");
        Assert.Equal(0, code);
        Assert.Equal(string.Empty, error);
        using var json = JsonDocument.Parse(output);
        var root = json.RootElement;
        var family = TestFamilies.Example(example);
        Assert.Equal(family.Unknowns, root.GetProperty("unknowns").EnumerateArray().Select(e => e.GetString()));
        Assert.Equal(family.System.Degrees, root.GetProperty("degrees").EnumerateArray().Select(e => e.GetInt32()));
        Assert.Equal(family.System.BezoutNumber.ToString(), root.GetProperty("bezout").GetRawText());
        var parameters = root.GetProperty("parameters").EnumerateArray().ToArray();
        Assert.Equal(family.Parameters.Count, parameters.Length);
        for (var k = 0; k < parameters.Length; k++)
        {
            Assert.Equal(family.Parameters[k].Name, parameters[k].GetProperty("name").GetString());
            Assert.Equal(family.Parameters[k].Low, parameters[k].GetProperty("low").GetDouble());
            Assert.Equal(family.Parameters[k].High, parameters[k].GetProperty("high").GetDouble());
        }
    }

    [Theory]
    [InlineData("--plaintext", "check", "--example", "cubic", "--plaintext")]
    [InlineData("--plaintext", "sweep", "--plaintext", "--example", "cubic")]
    [InlineData("--colour", "solve", "--example", "cubic", "--at", "b=-1,c=0", "--colour")]
    public async Task An_unknown_option_is_named_as_one_not_read_as_a_family_file(string unknown, params string[] args)
    {
        var (code, output, error) = await CliRunner.RunAsync(args);
        Assert.Equal(2, code);
        Assert.Equal(string.Empty, output);
        Assert.Contains($"unknown option '{unknown}' for '{args[0]}'", error, StringComparison.Ordinal);
        Assert.Contains($"Run 'fiber {args[0]} --help'", error, StringComparison.Ordinal);
        Assert.DoesNotContain("not both", error, StringComparison.Ordinal);
    }

    [Fact]
    public async Task Check_reads_a_hand_written_file_in_the_documented_format()
    {
        var path = Path.Combine(Path.GetTempPath(), $"fiber-check-{Guid.NewGuid():N}.json");
        await File.WriteAllTextAsync(path, """
            {
              "family": "two-bus line",
              "description": "optional free text",
              "unknowns": ["c", "s"],
              "parameters": [ { "name": "P", "low": -3, "high": 3 } ],
              "constants": { "B": 1.7 },
              "equations": [ "c^2 + s^2 - 1", "B*s - P" ]
            }
            """);
        try
        {
            var (code, output, _) = await CliRunner.RunAsync("check", path);
            Assert.Equal(0, code);
            Assert.Contains("bezout      2 (product of the degrees 2 x 1)", output, StringComparison.Ordinal);
            Assert.Contains("P in [-3, 3]", output, StringComparison.Ordinal);
            Assert.Contains("B = 1.7", output, StringComparison.Ordinal);
        }
        finally
        {
            File.Delete(path);
        }
    }

    [Fact]
    public async Task Invalid_file_exits_with_one_and_names_file_equation_and_column()
    {
        var path = Path.Combine(Path.GetTempPath(), $"fiber-bad-{Guid.NewGuid():N}.json");
        await File.WriteAllTextAsync(path, """
            { "family": "f", "unknowns": ["x"], "parameters": [ { "name": "k1", "low": 0, "high": 1 } ],
              "equations": [ "x^2 + k2*x" ] }
            """);
        try
        {
            var (code, output, error) = await CliRunner.RunAsync("check", path);
            Assert.Equal(1, code);
            Assert.Equal(string.Empty, output);
            Assert.Equal($"{Path.GetFileName(path)}: equation 1, column 7: unknown name 'k2' (did you mean 'k1'?)", error.Trim());
            Assert.DoesNotContain("   at ", error, StringComparison.Ordinal);
        }
        finally
        {
            File.Delete(path);
        }
    }

    [Fact]
    public async Task Missing_file_is_invalid_input_not_a_crash()
    {
        var (code, _, error) = await CliRunner.RunAsync("check", "/nonexistent/family.json");
        Assert.Equal(1, code);
        Assert.Contains("/nonexistent/family.json: no such file", error, StringComparison.Ordinal);
    }

    [Theory]
    [InlineData("check")]
    [InlineData("check", "--example", "cubic", "some.json")]
    [InlineData("check", "--example")]
    [InlineData("chek", "--example", "cubic")]
    [InlineData("check", "--example", "cubic", "--jsn")]
    public async Task Bad_usage_exits_with_two(params string[] args)
    {
        var (code, _, error) = await CliRunner.RunAsync(args);
        Assert.Equal(2, code);
        Assert.StartsWith("fiber: ", error, StringComparison.Ordinal);
    }

    [Fact]
    public async Task Unknown_example_suggests_the_nearest_name()
    {
        var (code, _, error) = await CliRunner.RunAsync("check", "--example", "microgrid");
        Assert.Equal(1, code);
        Assert.Contains("no bundled example 'microgrid' (did you mean 'microgrid3'?)", error, StringComparison.Ordinal);
    }

    [Fact]
    public async Task Examples_lists_every_bundled_family()
    {
        var (code, output, _) = await CliRunner.RunAsync("examples");
        Assert.Equal(0, code);
        foreach (var name in TestFamilies.ExampleNames)
        {
            Assert.Contains(name, output, StringComparison.Ordinal);
        }
    }
}
