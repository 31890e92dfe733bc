using System.Text.Json;

namespace FiberWorkers.Cli.Tests.Commands;

public sealed class SolveCommandTests
{
    [Fact]
    public async Task Solve_json_has_the_documented_keys_and_the_two_bus_answer()
    {
        // Lossless line, B = 1.7: P = B·sin δ has 2 real solutions for |P| < B (power-angle equation,
        // e.g. Grainger & Stevenson, Power System Analysis).
        var (code, output, error) = await CliRunner.RunAsync("solve", "--example", "two-bus", "--at", "P=1.2", "--json");
        Assert.Equal(0, code);
        Assert.Equal(string.Empty, error);
        using var json = JsonDocument.Parse(output);
        var root = json.RootElement;
        Assert.Equal(2, root.GetProperty("realCount").GetInt32());
        Assert.True(root.GetProperty("realCountCertified").GetBoolean());
        Assert.Equal(2, root.GetProperty("rootCount").GetInt32());
        Assert.Equal(2, root.GetProperty("pathsTracked").GetInt32());
        Assert.Equal(2, root.GetProperty("pathStatus").GetProperty("regular").GetInt32());
        Assert.Equal(0, root.GetProperty("pathStatus").GetProperty("failed").GetInt32());
        var solutions = root.GetProperty("solutions").EnumerateArray().ToArray();
        Assert.Equal(2, solutions.Length);
        foreach (var solution in solutions)
        {
            Assert.True(solution.GetProperty("real").GetBoolean());
            Assert.True(solution.GetProperty("certified").GetBoolean());
            Assert.True(solution.GetProperty("residual").GetDouble() < 1e-12);
            var s = solution.GetProperty("values").GetProperty("s");
            Assert.Equal(1.2 / 1.7, s[0].GetDouble(), 12);
            Assert.Equal(0.0, s[1].GetDouble(), 12);
        }
    }

    [Fact]
    public async Task Solve_outside_the_loadability_limit_finds_no_real_solution()
    {
        var (code, output, _) = await CliRunner.RunAsync("solve", "--example", "two-bus", "--at", "P=2.5", "--json");
        Assert.Equal(0, code);
        using var json = JsonDocument.Parse(output);
        Assert.Equal(0, json.RootElement.GetProperty("realCount").GetInt32());
        Assert.Equal(2, json.RootElement.GetProperty("rootCount").GetInt32());
    }

    [Fact]
    public async Task Parameter_method_saves_a_start_fiber_and_reuses_it()
    {
        var path = Path.Combine(Path.GetTempPath(), $"fiber-start-{Guid.NewGuid():N}.json");
        try
        {
            var first = await CliRunner.RunAsync("solve", "--example", "two-link-arm", "--at", "X=1,Y=0.5", "--method", "parameter", "--start-fiber", path);
            Assert.Equal(0, first.ExitCode);
            Assert.Contains("saved to", first.Output, StringComparison.Ordinal);
            Assert.True(File.Exists(path));
            var second = await CliRunner.RunAsync("solve", "--example", "two-link-arm", "--at", "X=1,Y=0.5", "--method", "parameter", "--start-fiber", path);
            Assert.Equal(0, second.ExitCode);
            Assert.Contains("read from", second.Output, StringComparison.Ordinal);
            Assert.Contains("real count  2 (certified)", second.Output, StringComparison.Ordinal);

            // A start fiber of another family is refused with its location.
            var wrong = await CliRunner.RunAsync("solve", "--example", "two-bus", "--at", "P=1", "--method", "parameter", "--start-fiber", path);
            Assert.Equal(1, wrong.ExitCode);
            Assert.Contains("familyHash", wrong.Error, StringComparison.Ordinal);
        }
        finally
        {
            File.Delete(path);
        }
    }

    [Theory]
    [InlineData("P2=0.3,P3=0.1", "missing a value for parameter 'P4'")]
    [InlineData("P2=0.3,P3=0.1,P4=0.2,P5=1", "'P5' is not a parameter of this family")]
    [InlineData("P2=0.3,P3=abc,P4=0.2", "item 2 'P3=abc': 'abc' is not a number")]
    [InlineData("P2=0.3,P2=0.1,P3=0,P4=0", "parameter 'P2' is given twice")]
    [InlineData("P2=NaN,P3=0,P4=0", "NaN or infinite values are not allowed")]
    [InlineData("P2,P3=0,P4=0", "item 1 'P2': expected NAME=VALUE")]
    public async Task Bad_parameter_points_are_invalid_input_naming_the_option_and_item(string at, string message)
    {
        var (code, output, error) = await CliRunner.RunAsync("solve", "--example", "microgrid4", "--at", at);
        Assert.Equal(1, code);
        Assert.Equal(string.Empty, output);
        Assert.Contains("--at: ", error, StringComparison.Ordinal);
        Assert.Contains(message, error, StringComparison.Ordinal);
    }

    [Fact]
    public async Task A_Bezout_number_above_the_limit_is_refused_with_a_suggestion()
    {
        var (code, _, error) = await CliRunner.RunAsync("solve", "--example", "microgrid5", "--at", "P2=0,P3=0,P4=0,P5=0", "--method", "total-degree", "--max-paths", "100");
        Assert.Equal(1, code);
        Assert.Contains("256 paths", error, StringComparison.Ordinal);
        Assert.Contains("parameter homotopy", error, StringComparison.Ordinal);
    }

    [Theory]
    [InlineData("--method", "newton")]
    [InlineData("--threads", "0")]
    public async Task Bad_options_are_usage_errors(string option, string value)
    {
        var (code, _, _) = await CliRunner.RunAsync("solve", "--example", "cubic", "--at", "b=-3,c=1", option, value);
        Assert.Equal(2, code);
    }

    [Fact]
    public async Task Plain_output_lists_the_real_solutions_and_the_caution()
    {
        var (code, output, _) = await CliRunner.RunAsync("solve", "--example", "cubic", "--at", "b=-3,c=1");
        Assert.Equal(0, code);
        // 4b³ + 27c² = −108 + 27 < 0: three real roots (discriminant of the cubic).
        Assert.Contains("real count  3 (certified)", output, StringComparison.Ordinal);
        Assert.Contains("caution: a planning aid", output, StringComparison.Ordinal);
    }
}
