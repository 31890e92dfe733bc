using System.Diagnostics;
using System.Globalization;
using System.Text;
using System.Text.RegularExpressions;
using FiberWorkers.Solving.Randomness;

namespace FiberWorkers.Fuzz.Tests.Engine;

/// <summary>
/// Runs a <see cref="FuzzTarget"/> for a time budget on a dedicated thread with a fixed 1 MiB stack (smaller than a
/// server's thread-pool threads, so recursion that fits here fits there), while the calling thread watches the
/// per-input time bound. Input i is a pure function of (seed, target name, i). Before each input runs it is written
/// to <c>fuzz-findings/last-input-*</c>, so that an input that kills the process (a stack overflow) survives it.
/// Findings are minimized (by deleting chunks while the failure persists) and saved; up to
/// <see cref="MaxFindings"/> distinct ones are collected before the run stops.
/// </summary>
internal sealed partial class FuzzRunner
{
    /// <summary>Distinct findings collected before a run stops early.</summary>
    public const int MaxFindings = 5;

    private const int StackBytes = 1 << 20;
    private const int MaxMinimizeAttempts = 4000;
    private static readonly TimeSpan MaxMinimizeTime = TimeSpan.FromSeconds(5);

    private readonly FuzzSettings _settings;
    private readonly string _findingsDirectory;

    public FuzzRunner(FuzzSettings settings, string? findingsDirectory = null)
    {
        ArgumentNullException.ThrowIfNull(settings);
        _settings = settings;
        _findingsDirectory = findingsDirectory ?? Path.Combine(AppContext.BaseDirectory, "fuzz-findings");
    }

    /// <summary>The stream input <paramref name="index"/> of <paramref name="target"/> is generated from.</summary>
    public static SeededRandom InputRandom(ulong seed, string target, long index) =>
        new(SeededRandom.Derive(SeededRandom.Derive(seed, target), (ulong)index));

    /// <summary>Runs <paramref name="target"/> for <paramref name="budget"/> (at least one input) and reports.</summary>
    public FuzzReport Run(FuzzTarget target, TimeSpan budget)
    {
        ArgumentNullException.ThrowIfNull(target);
        Directory.CreateDirectory(_findingsDirectory);
        var run = new RunState(this, target, budget);
        var worker = new Thread(run.Work, StackBytes) { IsBackground = true, Name = $"fuzz {target.Name}" };
        worker.Start();
        while (!worker.Join(50))
        {
            var started = Interlocked.Read(ref run.CurrentStartTicks);
            if (started >= 0 && run.Clock.ElapsedTicks - started > _settings.InputTimeout.TotalSeconds * Stopwatch.Frequency)
            {
                // The worker cannot be aborted; it is a background thread, so the process still exits.
                run.ReportHang(Volatile.Read(ref run.CurrentInput) ?? [], Interlocked.Read(ref run.CurrentIndex));
                break;
            }
        }

        if (run.WorkerError is { } error)
        {
            throw new InvalidOperationException($"the fuzz engine itself failed on target {target.Name}", error);
        }

        return run.Report();
    }

    /// <summary>Groups findings into bugs: exception type plus the start of the message with numbers and quoted text blanked.</summary>
    internal static string Signature(Exception error)
    {
        var message = QuotedPattern().Replace(error.Message, "'…'");
        message = DigitsPattern().Replace(message, "#");
        var firstLine = message.Split('\n')[0];
        return $"{error.GetType().FullName}: {(firstLine.Length > 60 ? firstLine[..60] : firstLine)}";
    }

    /// <summary>
    /// Deletes chunks of <paramref name="input"/> (halving the chunk size when nothing more can go) while
    /// <paramref name="stillFails"/> holds, within an attempt and time budget.
    /// </summary>
    internal static byte[] Minimize(byte[] input, Func<byte[], bool> stillFails, int maxAttempts, TimeSpan maxTime)
    {
        var clock = Stopwatch.StartNew();
        var current = input;
        var attempts = 0;
        for (var chunk = Math.Max(1, current.Length / 2); chunk >= 1; chunk /= 2)
        {
            var removed = true;
            while (removed)
            {
                removed = false;
                for (var start = 0; start < current.Length; start += chunk)
                {
                    if (attempts++ >= maxAttempts || clock.Elapsed > maxTime)
                    {
                        return current;
                    }

                    var end = Math.Min(current.Length, start + chunk);
                    var candidate = new byte[current.Length - (end - start)];
                    current.AsSpan(0, start).CopyTo(candidate);
                    current.AsSpan(end).CopyTo(candidate.AsSpan(start));
                    if (stillFails(candidate))
                    {
                        current = candidate;
                        removed = true;
                        start -= chunk;
                    }
                }
            }
        }

        return current;
    }

    [GeneratedRegex("'[^']*'")]
    private static partial Regex QuotedPattern();

    [GeneratedRegex("[0-9]+")]
    private static partial Regex DigitsPattern();

    private sealed class RunState(FuzzRunner runner, FuzzTarget target, TimeSpan budget)
    {
        public readonly Stopwatch Clock = Stopwatch.StartNew();
        public long CurrentStartTicks = -1;
        public long CurrentIndex;
        public byte[]? CurrentInput;
        public Exception? WorkerError;

        private readonly Dictionary<string, long> _outcomes = new(StringComparer.Ordinal);
        private readonly List<FuzzFinding> _findings = [];
        private readonly Lock _gate = new();
        private long _inputs;
        private (double Milliseconds, long Index) _slowest;
        private volatile bool _stopped;
        private TimeSpan _elapsed;

        public void Work()
        {
            try
            {
                var tracePath = Path.Combine(runner._findingsDirectory, $"last-input-{target.Name}{target.FileExtension}");
                using var trace = new FileStream(tracePath, FileMode.Create, FileAccess.Write, FileShare.Read, bufferSize: 0);
                var only = runner._settings.OnlyInput;
                for (var index = only ?? 0L; !_stopped; index++)
                {
                    if ((only is not null && index > only) || (index > (only ?? 0) && Clock.Elapsed >= budget))
                    {
                        break;
                    }

                    var input = target.Generate(InputRandom(runner._settings.Seed, target.Name, index));
                    trace.Position = 0;
                    trace.Write(input);
                    trace.SetLength(input.Length);
                    var (label, error, milliseconds) = Execute(input, index);
                    lock (_gate)
                    {
                        _inputs++;
                        if (milliseconds > _slowest.Milliseconds)
                        {
                            _slowest = (milliseconds, index);
                        }
                    }

                    if (error is null)
                    {
                        Count(label!);
                        continue;
                    }

                    Count("FINDING");
                    var signature = Signature(error);
                    bool known;
                    lock (_gate)
                    {
                        known = _findings.Any(f => f.Signature == signature);
                    }

                    if (!known)
                    {
                        AddFailure(input, index, error, signature);
                    }
                }
            }
            catch (Exception e)
            {
                WorkerError = e;
            }
            finally
            {
                lock (_gate)
                {
                    _elapsed = Clock.Elapsed;
                }
            }
        }

        public void ReportHang(byte[] input, long index)
        {
            _stopped = true;
            lock (_gate)
            {
                _elapsed = Clock.Elapsed;
                var path = Save(input, input, index, "hang");
                _findings.Add(new FuzzFinding(
                    FuzzFindingKind.Hang,
                    index,
                    "hang",
                    string.Create(CultureInfo.InvariantCulture, $"did not finish within {runner._settings.InputTimeout.TotalSeconds:F1} s"),
                    input,
                    input,
                    path));
            }
        }

        public FuzzReport Report()
        {
            lock (_gate)
            {
                return new FuzzReport
                {
                    Target = target.Name,
                    Seed = runner._settings.Seed,
                    Inputs = _inputs,
                    Elapsed = _elapsed == TimeSpan.Zero ? Clock.Elapsed : _elapsed,
                    Slowest = _slowest,
                    Outcomes = new Dictionary<string, long>(_outcomes, StringComparer.Ordinal),
                    Findings = [.. _findings],
                };
            }
        }

        private (string? Label, Exception? Error, double Milliseconds) Execute(byte[] input, long index)
        {
            Volatile.Write(ref CurrentInput, input);
            Interlocked.Exchange(ref CurrentIndex, index);
            var start = Clock.ElapsedTicks;
            Interlocked.Exchange(ref CurrentStartTicks, start);
            string? label = null;
            Exception? error = null;
            try
            {
                label = target.Check(input);
            }
            catch (Exception e)
            {
                error = e;
            }

            var ticks = Clock.ElapsedTicks - start;
            Interlocked.Exchange(ref CurrentStartTicks, -1);
            return (label, error, ticks * 1000.0 / Stopwatch.Frequency);
        }

        private void AddFailure(byte[] input, long index, Exception error, string signature)
        {
            var minimized = Minimize(
                input,
                candidate => !_stopped && Execute(candidate, index).Error is { } again && Signature(again) == signature,
                MaxMinimizeAttempts,
                MaxMinimizeTime);
            if (_stopped)
            {
                return;
            }

            var description = Execute(minimized, index).Error ?? error;
            var lines = description.ToString().Split('\n');
            lock (_gate)
            {
                var path = Save(input, minimized, index, "failure");
                _findings.Add(new FuzzFinding(
                    FuzzFindingKind.Failure, index, signature, string.Join('\n', lines.Take(14)).TrimEnd(), input, minimized, path));
                if (_findings.Count >= MaxFindings)
                {
                    _stopped = true;
                }
            }
        }

        private string Save(byte[] input, byte[] minimized, long index, string kind)
        {
            var stem = Path.Combine(runner._findingsDirectory, $"{target.Name}-{kind}-{runner._settings.Seed}-{index}");
            File.WriteAllBytes(stem + target.FileExtension, input);
            var minimizedPath = stem + "-min" + target.FileExtension;
            File.WriteAllBytes(minimizedPath, minimized);
            return minimizedPath;
        }

        private void Count(string label)
        {
            lock (_gate)
            {
                _outcomes[label] = _outcomes.GetValueOrDefault(label) + 1;
            }
        }
    }
}
