namespace FiberWorkers.Cli.Tests.Commands;

/// <summary>The options of <c>fiber bench monodromy</c> and <c>fiber bench sweep</c>: bad values are usage errors naming the option.</summary>
public sealed class BenchOptionsTests
{
    public static TheoryData<string[], string> Refused => new()
    {
        { ["bench", "monodromy", "--example", "nine-bus"], "--example: no bundled example 'nine-bus' (see 'fiber examples')" },
        { ["bench", "monodromy", "--threads", "0"], "--threads must be between 1 and 4096, got 0" },
        { ["bench", "monodromy", "--root-count", "0"], "--root-count must be between 1 and 1000000, got 0" },
        { ["bench", "sweep", "--example", "nine-bus"], "--example: no bundled example 'nine-bus' (see 'fiber examples')" },
        { ["bench", "sweep", "--budget", "99"], "--budget must be between 100 and 100000000" },
        { ["bench", "sweep", "--lines", "0"], "--lines must be between 1 and 10000" },
        { ["bench", "sweep", "--threads", "5000"], "--threads must be between 1 and 4096" },
        { ["bench", "sweep", "--cost-samples", "0"], "--cost-samples must be between 1 and 100000" },
    };

    [Theory]
    [MemberData(nameof(Refused))]
    public async Task A_bad_benchmark_option_is_a_usage_error_naming_it(string[] args, string message)
    {
        var (code, _, error) = await CliRunner.RunAsync(args);

        Assert.Equal(2, code);
        Assert.Contains(message, error, StringComparison.Ordinal);
    }
}
