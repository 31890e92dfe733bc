using System.Globalization;
using FiberWorkers.Atlas.Sweeps;

namespace FiberWorkers.Cli.Output;

/// <summary>
/// Sweep progress on stderr: one line rewritten in place on a terminal, plain log lines (at most one every few
/// seconds, and every stage change) when stderr is redirected.
/// </summary>
internal sealed class ProgressPrinter(TextWriter error, bool terminal) : IProgress<SweepProgress>
{
    private readonly Lock _gate = new();
    private DateTime _lastLine = DateTime.MinValue;
    private string _lastStage = string.Empty;

    public void Report(SweepProgress value)
    {
        lock (_gate)
        {
            var eta = value.Remaining is { } remaining ? $", ETA {Format(remaining)}" : string.Empty;
            var text = value.TilesTotal == 0
                ? value.Stage
                : string.Create(
                    CultureInfo.InvariantCulture,
                    $"{value.Stage}: tiles {value.TilesDone}/{value.TilesTotal}, samples {value.Samples}, crossings {value.Crossings}, {value.TilesPerSecond:F2} tiles/s{eta}");
            if (terminal)
            {
                error.Write($"\r{text,-100}");
                if (value.TilesTotal > 0 && value.TilesDone == value.TilesTotal)
                {
                    error.WriteLine();
                }

                return;
            }

            var now = DateTime.UtcNow;
            if (value.Stage != _lastStage || (now - _lastLine).TotalSeconds >= 5 || (value.TilesTotal > 0 && value.TilesDone == value.TilesTotal))
            {
                error.WriteLine(text);
                _lastLine = now;
                _lastStage = value.Stage;
            }
        }
    }

    public void Finish()
    {
        if (terminal)
        {
            error.WriteLine();
        }
    }

    private static string Format(TimeSpan span) => span.TotalHours >= 1
        ? span.ToString(@"h\:mm\:ss", CultureInfo.InvariantCulture)
        : span.ToString(@"m\:ss", CultureInfo.InvariantCulture);
}
