using System.Globalization;
using System.Text;

namespace FiberWorkers.Fuzz.Tests.Engine;

/// <summary>The result of running one target: how many inputs, how fast, the outcomes seen and the findings.</summary>
internal sealed class FuzzReport
{
    public required string Target { get; init; }

    public required ulong Seed { get; init; }

    public required long Inputs { get; init; }

    public required TimeSpan Elapsed { get; init; }

    /// <summary>The slowest input that finished, in milliseconds, and its index.</summary>
    public required (double Milliseconds, long Index) Slowest { get; init; }

    /// <summary>Outcome label → count.</summary>
    public required IReadOnlyDictionary<string, long> Outcomes { get; init; }

    public required IReadOnlyList<FuzzFinding> Findings { get; init; }

    public double InputsPerSecond => Inputs / Math.Max(Elapsed.TotalSeconds, 1e-9);

    /// <summary>Total count of outcomes whose label starts with <paramref name="prefix"/>.</summary>
    public long Count(string prefix) =>
        Outcomes.Where(o => o.Key.StartsWith(prefix, StringComparison.Ordinal)).Sum(o => o.Value);

    public override string ToString()
    {
        var text = new StringBuilder();
        text.Append(CultureInfo.InvariantCulture,
            $"fuzz {Target}: seed {Seed}, {Inputs} inputs in {Elapsed.TotalSeconds:F1} s ({InputsPerSecond:F0} inputs/s), "
            + $"slowest {Slowest.Milliseconds:F1} ms (input {Slowest.Index})");
        text.AppendLine();
        foreach (var (label, count) in Outcomes.OrderByDescending(o => o.Value).ThenBy(o => o.Key, StringComparer.Ordinal))
        {
            text.Append(CultureInfo.InvariantCulture, $"  {count,8}  {label}").AppendLine();
        }

        foreach (var finding in Findings)
        {
            text.Append(CultureInfo.InvariantCulture,
                $"FINDING ({finding.Kind}) at input {finding.Index} (FIBER_FUZZ_SEED={Seed} FIBER_FUZZ_INPUT={finding.Index}), "
                + $"{finding.Input.Length} bytes, minimized to {finding.Minimized.Length} bytes, saved as {finding.SavedPath}");
            text.AppendLine();
            text.Append("  minimized input: ").Append(Preview(finding.Minimized)).AppendLine();
            text.Append("  ").Append(finding.Description.ReplaceLineEndings(Environment.NewLine + "  ")).AppendLine();
        }

        return text.ToString();
    }

    /// <summary>Printable text of an input: ASCII as is, other bytes as \xNN, cut at 600 characters.</summary>
    public static string Preview(byte[] input)
    {
        var text = new StringBuilder();
        foreach (var b in input)
        {
            if (text.Length > 600)
            {
                text.Append(CultureInfo.InvariantCulture, $"... ({input.Length} bytes)");
                break;
            }

            text.Append(b is >= 0x20 and < 0x7F ? ((char)b).ToString() : string.Create(CultureInfo.InvariantCulture, $"\\x{b:X2}"));
        }

        return text.ToString();
    }
}
