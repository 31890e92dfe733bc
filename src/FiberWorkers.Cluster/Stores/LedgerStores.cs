using FiberWorkers.Algebra.Families;
using FiberWorkers.Atlas.Stores;

namespace FiberWorkers.Cluster.Stores;

/// <summary>
/// Opens the coordinator's store from a spec: <c>sqlite:PATH</c> (an atlas file, created when absent),
/// <c>postgres:CONNECTION-STRING</c> (Npgsql's <c>Host=…;Port=…;Username=…;Password=…;Database=…</c>), or
/// <c>postgres:env:VARIABLE</c> (the connection string read from an environment variable, so that a password stays
/// out of argument lists and process listings).
/// </summary>
public static class LedgerStores
{
    /// <summary>The accepted forms, as error messages list them.</summary>
    public const string Forms = "sqlite:PATH, postgres:CONNECTION-STRING or postgres:env:VARIABLE";

    /// <summary>
    /// Opens the store a spec names. A malformed spec, an unset variable, an unreachable server or a file that is not an
    /// atlas is an <see cref="InputException"/> that says what was expected; no message repeats a connection string.
    /// </summary>
    public static ISweepLedger Open(string spec, TimeProvider? time = null)
    {
        ArgumentNullException.ThrowIfNull(spec);
        var colon = spec.IndexOf(':', StringComparison.Ordinal);
        var kind = colon < 0 ? string.Empty : spec[..colon];
        var rest = colon < 0 ? string.Empty : spec[(colon + 1)..];
        if (kind.Equals("sqlite", StringComparison.OrdinalIgnoreCase))
        {
            return rest.Length == 0 ? throw Bad(spec, "names no file (sqlite:PATH)") : SqliteAtlasStore.Open(rest, time);
        }

        if (!kind.Equals("postgres", StringComparison.OrdinalIgnoreCase))
        {
            throw Bad(spec, colon < 0 ? $"has no kind; expected {Forms}" : $"unknown kind '{kind}'; expected {Forms}");
        }

        if (rest.StartsWith("env:", StringComparison.OrdinalIgnoreCase))
        {
            var variable = rest[4..];
            if (variable.Length == 0 || !variable.All(c => char.IsAsciiLetterOrDigit(c) || c == '_') || char.IsAsciiDigit(variable[0]))
            {
                throw Bad(spec, "names no environment variable (postgres:env:VARIABLE, letters, digits and '_')");
            }

            var value = Environment.GetEnvironmentVariable(variable);
            return string.IsNullOrWhiteSpace(value)
                ? throw new InputException("store", spec, $"the environment variable {variable} is not set or empty; it should hold the connection string (Host=…;Port=…;Username=…)")
                : PostgresAtlasStore.Open(value, time);
        }

        return rest.Trim().Length == 0
            ? throw Bad(spec, "holds no connection string (postgres:Host=…;Port=…;Username=…)")
            : PostgresAtlasStore.Open(rest, time);
    }

    /// <summary>An error about the spec itself; a spec that may be a connection string is not repeated.</summary>
    private static InputException Bad(string spec, string message)
    {
        var shown = spec.Contains('=', StringComparison.Ordinal) ? "(not shown: it may hold a password)" : $"'{spec}'";
        return new InputException("store", shown, message);
    }
}
