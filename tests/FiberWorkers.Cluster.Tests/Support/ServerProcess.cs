using System.Text.Json;
using FiberWorkers.Testing;

namespace FiberWorkers.Cluster.Tests.Support;

/// <summary>
/// A `fiber serve coordinator|worker` child process on loopback, with its JSON log lines parsed. Started with port 0
/// (or a given port), it is ready once it logged its bound address.
/// </summary>
internal sealed class ServerProcess : IDisposable
{
    private readonly FiberProcess _process;

    private ServerProcess(FiberProcess process, string role)
    {
        _process = process;
        Role = role;
    }

    public string Role { get; }

    /// <summary>The bound address, e.g. http://127.0.0.1:41234.</summary>
    public Uri Address { get; private set; } = null!;

    public int Port => Address.Port;

    public bool HasExited => _process.HasExited;

    /// <summary>The child's process id (for reading /proc/PID).</summary>
    public int ProcessId => _process.Id;

    /// <summary>The exit code once exited, else null.</summary>
    public int? ExitCodeOrNull => _process.HasExited ? _process.ExitCode : null;

    /// <summary>The worker id (workers only).</summary>
    public string? WorkerId { get; private set; }

    public static ServerProcess Coordinator(string store, int port = 0, IReadOnlyDictionary<string, string>? environment = null, params string[] extra)
    {
        var server = new ServerProcess(
            FiberProcess.Start(environment, ["serve", "coordinator", "--listen", $"127.0.0.1:{port}", "--plaintext", "--store", store, "--log-format", "json", .. extra]),
            "coordinator");
        server.WaitForAddress("coordinator listening on");
        return server;
    }

    public static ServerProcess Worker(Uri coordinator, string id, int threads = 1, string? fault = null, params string[] extra)
    {
        var environment = fault is null ? null : new Dictionary<string, string> { ["FIBER_WORKER_FAULT"] = fault };
        var server = new ServerProcess(
            FiberProcess.Start(environment, ["serve", "worker", "--listen", "127.0.0.1:0", "--plaintext", "--coordinator", coordinator.ToString().TrimEnd('/'), "--threads", $"{threads}", "--id", id, "--log-format", "json", .. extra]),
            "worker") { WorkerId = id };
        server.WaitForAddress("listening on");
        return server;
    }

    /// <summary>The parsed log events so far (lines that are not JSON are skipped).</summary>
    public IReadOnlyList<JsonElement> Events()
    {
        var events = new List<JsonElement>();
        foreach (var line in _process.Output.Split('\n', StringSplitOptions.RemoveEmptyEntries | StringSplitOptions.TrimEntries))
        {
            if (!line.StartsWith('{'))
            {
                continue;
            }

            try
            {
                using var document = JsonDocument.Parse(line);
                events.Add(document.RootElement.Clone());
            }
            catch (JsonException)
            {
                // A line cut by a kill.
            }
        }

        return events;
    }

    /// <summary>Events whose message template contains <paramref name="text"/>.</summary>
    public IReadOnlyList<JsonElement> EventsWith(string text) =>
        [.. Events().Where(e => e.TryGetProperty("@mt", out var template) && template.GetString()!.Contains(text, StringComparison.Ordinal))];

    public string Log => _process.Output + _process.Error;

    /// <summary>SIGKILL: gone at once, as a crash.</summary>
    public void Kill() => _process.Kill();

    /// <summary>SIGTERM, then wait for the exit.</summary>
    public int Stop(TimeSpan timeout)
    {
        _process.Terminate();
        if (!_process.WaitForExit(timeout))
        {
            _process.Kill();
            throw new TimeoutException($"{Role} did not stop within {timeout} of SIGTERM; log:\n{Log}");
        }

        return _process.ExitCode;
    }

    public void Dispose() => _process.Dispose();

    private void WaitForAddress(string marker)
    {
        var deadline = DateTime.UtcNow + TimeSpan.FromSeconds(60);
        while (DateTime.UtcNow < deadline)
        {
            foreach (var e in EventsWith(marker))
            {
                if (e.TryGetProperty("Address", out var address))
                {
                    Address = new Uri(address.GetString()!);
                    return;
                }
            }

            if (_process.HasExited)
            {
                throw new InvalidOperationException($"{Role} exited with {_process.ExitCode} before listening:\n{Log}");
            }

            Thread.Sleep(50);
        }

        _process.Kill();
        throw new TimeoutException($"{Role} did not report its address within 60 s:\n{Log}");
    }
}
