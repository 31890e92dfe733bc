using System.Text.Json;

namespace FiberWorkers.Cli.Tests.Commands;

public sealed class AskCommandTests : IDisposable
{
    private readonly string _folder = Path.Combine(Path.GetTempPath(), $"fiber-ask-{Guid.NewGuid():N}");

    public AskCommandTests() => Directory.CreateDirectory(_folder);

    public void Dispose() => Directory.Delete(_folder, recursive: true);

    [Fact]
    public async Task Ask_json_has_the_documented_keys_and_the_count_of_the_cubic()
    {
        var atlas = await CubicAtlas();
        var (code, output, error) = await CliRunner.RunAsync("ask", atlas, "--at", "b=-2,c=0.5", "--json");
        Assert.True(code == 0, error);
        using var json = JsonDocument.Parse(output);
        var root = json.RootElement;
        // 4b³ + 27c² = −32 + 6.75 < 0: three real roots (discriminant of the cubic).
        Assert.Equal(3, root.GetProperty("realCount").GetInt32());
        Assert.Contains(root.GetProperty("method").GetString(), new[] { "real-track", "full" });
        Assert.True(root.GetProperty("certified").GetBoolean());
        Assert.Equal(1, root.GetProperty("atlasVersion").GetInt32());
        Assert.Equal(3, root.GetProperty("solutions").GetArrayLength());
        foreach (var solution in root.GetProperty("solutions").EnumerateArray())
        {
            var x = solution.GetProperty("values").GetProperty("x")[0].GetDouble();
            Assert.True(Math.Abs((x * x * x) - (2 * x) + 0.5) < 1e-12);
        }
    }

    [Fact]
    public async Task A_batch_with_malformed_rows_answers_the_good_rows_and_reports_the_bad_ones()
    {
        var atlas = await CubicAtlas();
        var points = Path.Combine(_folder, "points.csv");
        await File.WriteAllTextAsync(points, "b,c,name\n-2,0.5,first\n-1,abc,second\n0.5\n0.5,0.1,fourth\n-2,NaN,fifth\n");
        var answers = Path.Combine(_folder, "answers.csv");
        var (code, output, error) = await CliRunner.RunAsync("ask", atlas, "--points", points, "--out", answers);
        Assert.Equal(1, code);
        Assert.Contains("answered    2 of 5 points", output, StringComparison.Ordinal);
        Assert.Contains("points.csv: line 3, column c: 'abc' is not a number", error, StringComparison.Ordinal);
        Assert.Contains("points.csv: line 4: missing the column 'c'", error, StringComparison.Ordinal);
        Assert.Contains("points.csv: line 6, column c: NaN or infinite values are not allowed", error, StringComparison.Ordinal);
        var rows = (await File.ReadAllLinesAsync(answers)).ToArray();
        Assert.Equal(6, rows.Length);
        Assert.StartsWith("b,c,real_count,method,certified,error", rows[0], StringComparison.Ordinal);
        Assert.StartsWith("-2,0.5,3,", rows[1], StringComparison.Ordinal);
        Assert.Contains("is not a number", rows[2], StringComparison.Ordinal);
        Assert.StartsWith("0.5,0.1,1,", rows[4], StringComparison.Ordinal);
    }

    [Fact]
    public async Task Verify_full_agrees_and_a_point_outside_the_box_is_solved_in_full()
    {
        var atlas = await CubicAtlas();
        var (_, verified, _) = await CliRunner.RunAsync("ask", atlas, "--at", "b=-1.5,c=0.2", "--verify", "full", "--json");
        using (var json = JsonDocument.Parse(verified))
        {
            if (json.RootElement.GetProperty("method").GetString() == "real-track")
            {
                Assert.True(json.RootElement.GetProperty("verified").GetBoolean());
            }
        }

        var (code, outside, _) = await CliRunner.RunAsync("ask", atlas, "--at", "b=5,c=0", "--json");
        Assert.Equal(0, code);
        using var answer = JsonDocument.Parse(outside);
        Assert.Equal("full", answer.RootElement.GetProperty("method").GetString());
        Assert.True(answer.RootElement.GetProperty("outsideBox").GetBoolean());
        Assert.Equal(1, answer.RootElement.GetProperty("realCount").GetInt32());
    }

    [Fact]
    public async Task Learn_keeps_fully_solved_points_as_a_new_version()
    {
        var atlas = await CubicAtlas();
        var (code, output, _) = await CliRunner.RunAsync("ask", atlas, "--at", "b=-2.8,c=1.8", "--learn");
        Assert.Equal(0, code);
        if (output.Contains("method      full", StringComparison.Ordinal))
        {
            Assert.Contains("kept as samples in atlas version 2", output, StringComparison.Ordinal);
            var (_, list, _) = await CliRunner.RunAsync("atlas", atlas, "--json");
            Assert.Contains("\"learned\"", list, StringComparison.Ordinal);
        }
    }

    [Theory]
    [InlineData("--at", "b=1")]
    [InlineData("--at", "b=1,c=0,d=3")]
    public async Task Bad_points_are_input_errors(string option, string value)
    {
        var atlas = await CubicAtlas();
        var (code, _, error) = await CliRunner.RunAsync("ask", atlas, option, value);
        Assert.Equal(1, code);
        Assert.Contains("--at", error, StringComparison.Ordinal);
    }

    [Fact]
    public async Task Both_or_neither_of_at_and_points_is_bad_usage()
    {
        var atlas = await CubicAtlas();
        Assert.Equal(2, (await CliRunner.RunAsync("ask", atlas)).ExitCode);
        Assert.Equal(2, (await CliRunner.RunAsync("ask", atlas, "--at", "b=0,c=0", "--points", "x.csv", "--out", "y.csv")).ExitCode);
        Assert.Equal(2, (await CliRunner.RunAsync("ask", atlas, "--points", "x.csv")).ExitCode);
    }

    private async Task<string> CubicAtlas()
    {
        var path = Path.Combine(_folder, "cubic.db");
        if (!File.Exists(path))
        {
            var (code, _, error) = await CliRunner.RunAsync("sweep", "--example", "cubic", "--atlas", path, "--tiles", "4x4", "--lines", "6");
            Assert.True(code == 0, error);
        }

        return path;
    }
}
