namespace FiberWorkers.Cli.Tests;

/// <summary>Runs the <c>fiber</c> command tree in-process and captures its output and exit code.</summary>
internal static class CliRunner
{
    public static async Task<(int ExitCode, string Output, string Error)> RunAsync(params string[] args)
    {
        using var output = new StringWriter();
        using var error = new StringWriter();
        var code = await CommandLine.RunAsync(args, output, error);
        return (code, output.ToString(), error.ToString());
    }
}
