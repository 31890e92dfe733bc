namespace FiberWorkers.Cli.Tests.Commands;

/// <summary>
/// <c>fiber serve --admin-listen</c>: a bad address, the gRPC listener's own port, or a non-loopback address without
/// TLS is a usage error (exit 2) naming the option, before anything listens.
/// </summary>
public sealed class ServeOperationsTests
{
    public static TheoryData<string[], string> Refused => new()
    {
        { ["serve", "coordinator", "--listen", "127.0.0.1:7400", "--plaintext", "--store", "sqlite:unused.db", "--admin-listen", "metrics"], "--admin-listen 'metrics' is not HOST:PORT" },
        { ["serve", "coordinator", "--listen", "127.0.0.1:7400", "--plaintext", "--store", "sqlite:unused.db", "--admin-listen", "127.0.0.1:7400"], "--admin-listen 127.0.0.1:7400 uses the port of --listen 127.0.0.1:7400" },
        { ["serve", "coordinator", "--listen", "127.0.0.1:7400", "--plaintext", "--store", "sqlite:unused.db", "--admin-listen", "0.0.0.0:9400"], "--admin-listen 0.0.0.0:9400 is not a loopback address" },
        { ["serve", "worker", "--listen", "127.0.0.1:0", "--plaintext", "--coordinator", "http://127.0.0.1:7400", "--admin-listen", "10.0.0.5:9401"], "--admin-listen 10.0.0.5:9401 is not a loopback address" },
        { ["serve", "worker", "--listen", "127.0.0.1:7401", "--plaintext", "--coordinator", "http://127.0.0.1:7400", "--admin-listen", "localhost:7401"], "uses the port of --listen 127.0.0.1:7401" },
    };

    [Theory]
    [MemberData(nameof(Refused))]
    public async Task A_refused_admin_listener_is_a_usage_error_naming_the_option(string[] args, string message)
    {
        var (code, _, error) = await CliRunner.RunAsync(args).WaitAsync(TimeSpan.FromSeconds(60));

        Assert.Equal(2, code);
        Assert.Contains(message, error, StringComparison.Ordinal);
    }
}
