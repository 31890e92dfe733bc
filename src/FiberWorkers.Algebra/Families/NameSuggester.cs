namespace FiberWorkers.Algebra.Families;

/// <summary>Finds the nearest known name to a misspelt one (Levenshtein distance), for "did you mean" hints.</summary>
public static class NameSuggester
{
    /// <summary>
    /// A candidate equal to the name but for case, else the closest candidate within a distance of about a third
    /// of the name's length, or null. A one-character name gets only a case match: one edit turns any one-letter
    /// name into any other, so such a hint would point at an arbitrary name.
    /// </summary>
    public static string? Nearest(string name, IEnumerable<string> candidates)
    {
        ArgumentNullException.ThrowIfNull(name);
        ArgumentNullException.ThrowIfNull(candidates);
        string? best = null;
        string? caseMatch = null;
        var bestDistance = int.MaxValue;
        var allowed = Math.Max(1, (name.Length + 2) / 3);
        foreach (var candidate in candidates)
        {
            if (caseMatch is null && string.Equals(candidate, name, StringComparison.OrdinalIgnoreCase))
            {
                caseMatch = candidate;
            }

            // The lengths' difference bounds the distance from below: a candidate it rules out could not be
            // suggested, and skipping it keeps a 100,000-character name against 1,000 names from taking minutes.
            if (Math.Abs(name.Length - candidate.Length) > allowed)
            {
                continue;
            }

            var distance = Distance(name, candidate);
            if (distance < bestDistance || (distance == bestDistance && string.CompareOrdinal(candidate, best) < 0))
            {
                best = candidate;
                bestDistance = distance;
            }
        }

        if (caseMatch is not null)
        {
            return caseMatch;
        }

        return name.Length > 1 && bestDistance <= allowed ? best : null;
    }

    /// <summary>" (did you mean 'x'?)" or the empty string.</summary>
    public static string Hint(string name, IEnumerable<string> candidates) =>
        Nearest(name, candidates) is { } nearest ? $" (did you mean '{nearest}'?)" : string.Empty;

    internal static int Distance(string a, string b)
    {
        var previous = new int[b.Length + 1];
        var current = new int[b.Length + 1];
        for (var j = 0; j <= b.Length; j++)
        {
            previous[j] = j;
        }

        for (var i = 1; i <= a.Length; i++)
        {
            current[0] = i;
            for (var j = 1; j <= b.Length; j++)
            {
                var cost = a[i - 1] == b[j - 1] ? 0 : 1;
                current[j] = Math.Min(Math.Min(current[j - 1] + 1, previous[j] + 1), previous[j - 1] + cost);
            }

            (previous, current) = (current, previous);
        }

        return previous[b.Length];
    }
}
