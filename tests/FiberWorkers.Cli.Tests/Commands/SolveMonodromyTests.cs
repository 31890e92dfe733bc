using System.Text.Json;
using FiberWorkers.Testing;

namespace FiberWorkers.Cli.Tests.Commands;

/// <summary><c>fiber solve --method monodromy|auto</c>, and the family file's optional rootCount hint.</summary>
public sealed class SolveMonodromyTests : IDisposable
{
    private readonly string _directory = Directory.CreateTempSubdirectory("fiber-solve-monodromy-").FullName;

    public void Dispose() => Directory.Delete(_directory, recursive: true);

    [Theory]
    // Four buses, equal lines: 14 at generic injections (Gröbner-basis computation, REFERENCES.md).
    [InlineData("microgrid4", "P2=0.3,P3=-0.45,P4=0.2", 14)]
    // Two-link arm: 2 solutions, both real for a reachable target, here r = |(1.1, 0.4)| between |L₁ − L₂| = 0.4
    // and L₁ + L₂ = 1.6 (standard robot kinematics, e.g. Craig, Introduction to Robotics).
    [InlineData("two-link-arm", "X=1.1,Y=0.4", 2)]
    // Five buses, unequal lines: C(8, 4) = 70, the bound (Baillieul & Byrnes 1982, from memory), reached.
    [InlineData("microgrid5", "P2=0.3,P3=-0.2,P4=0.1,P5=-0.25", 70)]
    public async Task Monodromy_solves_the_bundled_examples_with_their_root_counts(string example, string at, int rootCount)
    {
        var (code, output, error) = await CliRunner.RunAsync("solve", "--example", example, "--at", at, "--method", "monodromy", "--json");
        var (totalCode, totalOutput, _) = await CliRunner.RunAsync("solve", "--example", example, "--at", at, "--method", "total-degree", "--json");

        Assert.Equal(0, code);
        Assert.Equal(string.Empty, error);
        using var json = JsonDocument.Parse(output);
        var root = json.RootElement;
        Assert.Equal("parameter", root.GetProperty("method").GetString());
        Assert.Equal(rootCount, root.GetProperty("rootCount").GetInt32());
        Assert.Equal(rootCount, root.GetProperty("pathsTracked").GetInt32());
        Assert.Equal(0, root.GetProperty("pathStatus").GetProperty("failed").GetInt32());
        // The real count agrees with a total-degree solve at the same real point.
        Assert.Equal(0, totalCode);
        using var total = JsonDocument.Parse(totalOutput);
        Assert.Equal(total.RootElement.GetProperty("rootCount").GetInt32(), root.GetProperty("rootCount").GetInt32());
        Assert.Equal(total.RootElement.GetProperty("realCount").GetInt32(), root.GetProperty("realCount").GetInt32());
        Assert.True(root.GetProperty("realCountCertified").GetBoolean());
        if (example == "two-link-arm")
        {
            Assert.Equal(2, root.GetProperty("realCount").GetInt32());
        }
    }

    [Fact]
    public async Task Monodromy_text_output_says_how_the_start_fiber_was_obtained()
    {
        var (code, output, error) = await CliRunner.RunAsync(
            "solve", "--example", "microgrid5", "--at", "P2=0.3,P3=-0.2,P4=0.1,P5=-0.25", "--method", "monodromy");

        Assert.Equal(0, code);
        Assert.Equal(string.Empty, error);
        Assert.Contains("parameter homotopy from a start fiber of 70 solutions (monodromy (asked for); monodromy, ", output, StringComparison.Ordinal);
        Assert.Contains("completeness: trace-test", output, StringComparison.Ordinal);
    }

    [Theory]
    [InlineData("microgrid5", "P2=0.3,P3=-0.2,P4=0.1,P5=-0.25", "auto: Bézout number 256 above 128: monodromy expected cheaper; monodromy, ")]
    [InlineData("two-bus", "P=1.2", "auto: Bézout number 2 is at most 128: total degree is cheap; total-degree, ")]
    public async Task Auto_prints_its_decision_and_is_the_default(string example, string at, string decision)
    {
        var asked = await CliRunner.RunAsync("solve", "--example", example, "--at", at, "--method", "auto");
        var byDefault = await CliRunner.RunAsync("solve", "--example", example, "--at", at);

        Assert.Equal(0, asked.ExitCode);
        Assert.Contains(decision, asked.Output, StringComparison.Ordinal);
        Assert.Equal(asked.Output, byDefault.Output);
    }

    [Theory]
    [InlineData("auto")]
    [InlineData("monodromy")]
    public async Task A_wrong_root_count_hint_is_warned_about_on_stderr_and_the_true_count_is_used(string method)
    {
        // One lossless line, B = 1.7: P = B·sin δ has 2 solutions, both real for |P| < B (power-angle equation,
        // e.g. Grainger & Stevenson, Power System Analysis). The file claims 3.
        var path = TwoBusFile(rootCount: 3);

        var (code, output, error) = await CliRunner.RunAsync("solve", path, "--at", "P=1.2", "--method", method, "--json");

        Assert.Equal(0, code);
        Assert.Contains("warning: the family file expects 3 solutions; the start fiber has 2", error, StringComparison.Ordinal);
        using var json = JsonDocument.Parse(output);
        Assert.Equal(2, json.RootElement.GetProperty("rootCount").GetInt32());
        Assert.Equal(2, json.RootElement.GetProperty("realCount").GetInt32());
    }

    [Theory]
    [InlineData("auto")]
    [InlineData("monodromy")]
    public async Task A_right_root_count_hint_gives_no_warning(string method)
    {
        var path = TwoBusFile(rootCount: 2);

        var (code, _, error) = await CliRunner.RunAsync("solve", path, "--at", "P=1.2", "--method", method, "--json");

        Assert.Equal(0, code);
        Assert.Equal(string.Empty, error);
    }

    [Theory]
    [InlineData(0)]
    [InlineData(-3)]
    public async Task A_non_positive_root_count_is_an_input_error_with_its_location(int rootCount)
    {
        var path = TwoBusFile(rootCount);

        var (code, output, error) = await CliRunner.RunAsync("solve", path, "--at", "P=1.2", "--method", "monodromy");

        Assert.Equal(1, code);
        Assert.Equal(string.Empty, output);
        Assert.Contains($"two-bus-hinted.json: rootCount: expected a positive integer, found {rootCount}", error, StringComparison.Ordinal);
    }

    /// <summary>The two-bus line of our examples, written as a family file with the given rootCount.</summary>
    private string TwoBusFile(int rootCount)
    {
        var path = Path.Combine(_directory, "two-bus-hinted.json");
        File.WriteAllText(path, TestFamilies.Json(
            "two-bus line, hinted",
            ["c", "s"],
            ["c^2 + s^2 - 1", "B*s - P"],
            [("P", -3, 3)],
            new Dictionary<string, double> { ["B"] = 1.7 },
            rootCount));
        return path;
    }
}
