namespace FiberWorkers.Cli.Tests.Commands;

/// <summary>The request-limit options of <c>fiber serve</c>: out-of-range values are usage errors naming the option.</summary>
public sealed class ServeLimitsTests
{
    public static TheoryData<string[], string> Refused => new()
    {
        { ["serve", "coordinator", "--store", "sqlite:unused.db", "--query-rate", "0"], "--query-rate must be between 0.001 and 1000000 per second, got 0" },
        { ["serve", "coordinator", "--store", "sqlite:unused.db", "--max-concurrent-sweeps", "0"], "--max-concurrent-sweeps must be between 1 and 1000, got 0" },
        { ["serve", "coordinator", "--store", "sqlite:unused.db", "--max-tiles-per-sweep", "100000001"], "--max-tiles-per-sweep must be between 1 and 100000000, got 100000001" },
        { ["serve", "coordinator", "--store", "sqlite:unused.db", "--max-parameters", "65"], "--max-parameters must be between 1 and 64, got 65" },
        {
            ["serve", "coordinator", "--store", "sqlite:unused.db", "--max-message-bytes", "4096", "--max-family-bytes", "8192"],
            "--max-family-bytes 8192 exceeds --max-message-bytes 4096: a family travels inside one message"
        },
        { ["serve", "worker", "--coordinator", "http://127.0.0.1:7400", "--max-paths", "0"], "--max-paths must be between 1 and 100000000, got 0" },
        { ["serve", "worker", "--coordinator", "http://127.0.0.1:7400", "--max-message-bytes", "100"], "--max-message-bytes must be between 1024 and 1073741824, got 100" },
    };

    [Theory]
    [MemberData(nameof(Refused))]
    public async Task An_out_of_range_limit_is_a_usage_error_naming_the_option_and_its_range(string[] args, string message)
    {
        var (code, _, error) = await CliRunner.RunAsync(args);

        Assert.Equal(2, code);
        Assert.Contains(message, error, StringComparison.Ordinal);
    }

    [Fact]
    public async Task The_rate_and_concurrency_limits_are_the_coordinators_only()
    {
        var (code, _, error) = await CliRunner.RunAsync("serve", "worker", "--coordinator", "http://127.0.0.1:7400", "--query-rate", "5");

        Assert.Equal(2, code);
        Assert.Contains("--query-rate", error, StringComparison.Ordinal);
    }
}
