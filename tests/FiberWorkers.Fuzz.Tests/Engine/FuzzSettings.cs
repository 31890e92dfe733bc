using System.Globalization;

namespace FiberWorkers.Fuzz.Tests.Engine;

/// <summary>
/// How long and from which seed the fuzz tests run, read from the environment so CI stays fast and a developer can
/// run for hours: <c>FIBER_FUZZ_SECONDS</c> (total budget of all fuzz tests, default 20 s),
/// <c>FIBER_FUZZ_SEED</c> (decimal or 0x-hex, default <see cref="DefaultSeed"/>), <c>FIBER_FUZZ_INPUT_SECONDS</c>
/// (the bound one input must finish within, default 2 s) and <c>FIBER_FUZZ_INPUT</c> (replay one input index only).
/// </summary>
internal sealed record FuzzSettings(double TotalSeconds, ulong Seed, TimeSpan InputTimeout, long? OnlyInput)
{
    /// <summary>The fixed default seed, so that a plain test run is deterministic.</summary>
    public const ulong DefaultSeed = 20261201;

    /// <summary>The settings of this process.</summary>
    public static FuzzSettings Current { get; } = FromEnvironment(Environment.GetEnvironmentVariable);

    /// <summary>Reads the settings through <paramref name="variable"/>; a malformed value is an error naming the variable.</summary>
    public static FuzzSettings FromEnvironment(Func<string, string?> variable)
    {
        ArgumentNullException.ThrowIfNull(variable);
        var seconds = ReadPositiveDouble(variable, "FIBER_FUZZ_SECONDS", 20);
        var inputSeconds = ReadPositiveDouble(variable, "FIBER_FUZZ_INPUT_SECONDS", 2);
        var seed = DefaultSeed;
        if (variable("FIBER_FUZZ_SEED") is { Length: > 0 } seedText && !TryParseSeed(seedText, out seed))
        {
            throw new InvalidOperationException(
                $"FIBER_FUZZ_SEED: expected a non-negative integer (decimal or 0x hex), found '{seedText}'");
        }

        long? only = null;
        if (variable("FIBER_FUZZ_INPUT") is { Length: > 0 } inputText)
        {
            if (!long.TryParse(inputText, NumberStyles.None, CultureInfo.InvariantCulture, out var index))
            {
                throw new InvalidOperationException($"FIBER_FUZZ_INPUT: expected an input index, found '{inputText}'");
            }

            only = index;
        }

        return new FuzzSettings(seconds, seed, TimeSpan.FromSeconds(inputSeconds), only);
    }

    /// <summary>The part of the total budget given to one fuzz target.</summary>
    public TimeSpan Share(double fraction) => TimeSpan.FromSeconds(TotalSeconds * fraction);

    private static double ReadPositiveDouble(Func<string, string?> variable, string name, double fallback)
    {
        if (variable(name) is not { Length: > 0 } text)
        {
            return fallback;
        }

        if (!double.TryParse(text, NumberStyles.Float, CultureInfo.InvariantCulture, out var value) || !(value > 0) || !double.IsFinite(value))
        {
            throw new InvalidOperationException($"{name}: expected a positive number of seconds, found '{text}'");
        }

        return value;
    }

    private static bool TryParseSeed(string text, out ulong seed) =>
        text.StartsWith("0x", StringComparison.OrdinalIgnoreCase)
            ? ulong.TryParse(text.AsSpan(2), NumberStyles.AllowHexSpecifier, CultureInfo.InvariantCulture, out seed)
            : ulong.TryParse(text, NumberStyles.None, CultureInfo.InvariantCulture, out seed);
}
