using FiberWorkers.Cli.Commands;

namespace FiberWorkers.Cli.Tests.Commands;

/// <summary>How <c>--tiles auto</c>, <c>--lines</c> and <c>--budget</c> choose the tiles and the lines per tile.</summary>
public sealed class SweepLayoutTests
{
    [Fact]
    public void A_budget_without_lines_keeps_four_tiles_per_axis_and_takes_the_lines_from_the_budget()
    {
        var (divisions, lines) = SweepCommand.Layout("auto", 3, null, 100_000);

        Assert.Equal([4, 4, 4], divisions);
        // 100,000 samples at about five per line over 64 tiles: 313 lines each (rounded up).
        Assert.Equal(313, lines);
        Assert.True(divisions.Aggregate(1, (p, d) => p * d) * lines * 5 >= 100_000);
    }

    [Fact]
    public void Given_lines_keep_them_and_let_the_budget_choose_the_tiles()
    {
        var (divisions, lines) = SweepCommand.Layout("auto", 3, 4, 100_000);

        Assert.Equal(4, lines);
        // About four samples per line: 100,000 / 16 = 6,250 tiles, 18 per axis.
        Assert.Equal([18, 18, 18], divisions);
    }

    [Theory]
    [InlineData("auto", null, null, 4)]
    [InlineData("3x5", null, 1_000L, 4)]
    [InlineData("3x5", 7, 1_000L, 7)]
    public void Without_an_auto_budget_the_lines_are_the_given_or_default_ones(string tiles, int? lines, long? budget, int expected)
    {
        var (divisions, perTile) = SweepCommand.Layout(tiles, 2, lines, budget);

        Assert.Equal(expected, perTile);
        Assert.Equal(tiles == "auto" ? [4, 4] : [3, 5], divisions);
    }

    [Fact]
    public void A_tiny_budget_still_gets_one_line_per_tile()
    {
        var (_, lines) = SweepCommand.Layout("auto", 4, null, 1);

        Assert.Equal(1, lines);
    }

    [Theory]
    [InlineData("--lines", "abc", "Cannot parse argument 'abc' for option '--lines' as expected type 'integer'")]
    [InlineData("--budget", "1e9x", "Cannot parse argument '1e9x' for option '--budget' as expected type 'integer'")]
    public async Task A_value_that_is_not_a_number_is_named_without_the_runtime_type(string option, string value, string expected)
    {
        var (code, output, error) = await CliRunner.RunAsync("sweep", "--example", "cubic", "--atlas", "unused.db", option, value);

        Assert.Equal(2, code);
        Assert.Equal(string.Empty, output);
        Assert.Contains(expected, error, StringComparison.Ordinal);
        Assert.DoesNotContain("System.", error, StringComparison.Ordinal);
    }
}
