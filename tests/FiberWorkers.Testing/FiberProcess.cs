using System.Diagnostics;
using System.Text;
using System.Text.Json;

namespace FiberWorkers.Testing;

/// <summary>
/// Runs the built <c>fiber</c> executable as a child process (test projects that use it reference the CLI project
/// without its assembly, so the CLI is built first, in the same configuration and runtime).
/// </summary>
public sealed class FiberProcess : IDisposable
{
    private readonly Process _process;
    private readonly StringBuilder _output = new();
    private readonly StringBuilder _error = new();

    private FiberProcess(Process process)
    {
        _process = process;
    }

    /// <summary>src/FiberWorkers.Cli/bin/{configuration}/net10.0/fiber.dll of this repository.</summary>
    public static string Executable { get; } = Locate();

    public bool HasExited => _process.HasExited;

    /// <summary>The child's process id.</summary>
    public int Id => _process.Id;

    public int ExitCode => _process.ExitCode;

    public string Output
    {
        get
        {
            lock (_output)
            {
                return _output.ToString();
            }
        }
    }

    public string Error
    {
        get
        {
            lock (_error)
            {
                return _error.ToString();
            }
        }
    }

    public static FiberProcess Start(params string[] arguments) => Start(null, arguments);

    /// <summary>Starts the executable with extra environment variables.</summary>
    public static FiberProcess Start(IReadOnlyDictionary<string, string>? environment, params string[] arguments)
    {
        var host = Environment.GetEnvironmentVariable("DOTNET_HOST_PATH") is { Length: > 0 } path && File.Exists(path) ? path : "dotnet";
        var start = new ProcessStartInfo(host)
        {
            RedirectStandardOutput = true,
            RedirectStandardError = true,
            UseShellExecute = false,
        };
        foreach (var (name, value) in environment ?? new Dictionary<string, string>())
        {
            start.Environment[name] = value;
        }

        start.ArgumentList.Add(Executable);
        foreach (var argument in arguments)
        {
            start.ArgumentList.Add(argument);
        }

        var process = new Process { StartInfo = start };
        var child = new FiberProcess(process);
        process.OutputDataReceived += (_, e) => child.Append(child._output, e.Data);
        process.ErrorDataReceived += (_, e) => child.Append(child._error, e.Data);
        process.Start();
        process.BeginOutputReadLine();
        process.BeginErrorReadLine();
        return child;
    }

    /// <summary>Runs to the end (at most <paramref name="timeout"/>) and returns the exit code.</summary>
    public static (int ExitCode, string Output, string Error) Run(TimeSpan timeout, params string[] arguments)
    {
        using var child = Start(arguments);
        if (!child.WaitForExit(timeout))
        {
            child.Kill();
            throw new TimeoutException($"fiber {string.Join(' ', arguments)} did not finish within {timeout}; stderr: {child.Error}");
        }

        return (child.ExitCode, child.Output, child.Error);
    }

    /// <summary>The --json summary of a finished run.</summary>
    public static JsonElement Summary(string output)
    {
        using var document = JsonDocument.Parse(output);
        return document.RootElement.Clone();
    }

    public bool WaitForExit(TimeSpan timeout)
    {
        if (!_process.WaitForExit(timeout))
        {
            return false;
        }

        // The parameterless wait drains the redirected streams.
        _process.WaitForExit();
        return true;
    }

    /// <summary>Sends SIGTERM (a polite stop: the process may finish what it is doing).</summary>
    public void Terminate()
    {
        if (!_process.HasExited)
        {
            using var kill = Process.Start(new ProcessStartInfo("kill", ["-TERM", _process.Id.ToString(System.Globalization.CultureInfo.InvariantCulture)]) { UseShellExecute = false });
            kill?.WaitForExit();
        }
    }

    /// <summary>Kills the child (and anything it started) at once, as a crash would (SIGKILL).</summary>
    public void Kill()
    {
        if (!_process.HasExited)
        {
            _process.Kill(entireProcessTree: true);
        }

        _process.WaitForExit();
    }

    public void Dispose()
    {
        Kill();
        _process.Dispose();
    }

    private static string Locate()
    {
        // The CLI is built as a reference of this project with the same configuration, framework and runtime, so its
        // output path below src/FiberWorkers.Cli/bin mirrors this assembly's below tests/FiberWorkers.Atlas.Tests/bin
        // (e.g. Release/net10.0/linux-x64).
        var here = new DirectoryInfo(AppContext.BaseDirectory.TrimEnd(Path.DirectorySeparatorChar));
        var parts = new Stack<string>();
        var bin = here;
        while (bin is not null && bin.Name != "bin")
        {
            parts.Push(bin.Name);
            bin = bin.Parent;
        }

        var root = bin?.Parent?.Parent?.Parent;
        if (bin is null || root is null || !File.Exists(Path.Combine(root.FullName, "FiberWorkers.sln")))
        {
            throw new InvalidOperationException($"{AppContext.BaseDirectory} is not a build output inside the FiberWorkers repository");
        }

        var executable = Path.Combine([root.FullName, "src", "FiberWorkers.Cli", "bin", .. parts, "fiber.dll"]);
        return File.Exists(executable)
            ? executable
            : throw new InvalidOperationException($"{executable} is missing: build the test project (it builds the CLI first)");
    }

    private void Append(StringBuilder buffer, string? line)
    {
        if (line is null)
        {
            return;
        }

        lock (buffer)
        {
            buffer.AppendLine(line);
        }
    }
}
