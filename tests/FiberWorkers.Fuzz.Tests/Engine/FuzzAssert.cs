namespace FiberWorkers.Fuzz.Tests.Engine;

/// <summary>Assertions on a <see cref="FuzzReport"/>.</summary>
internal static class FuzzAssert
{
    /// <summary>Inputs after which every listed outcome must have been seen (fewer: a very short run proves little either way).</summary>
    private const long CoverageInputs = 2000;

    /// <summary>Fails with the whole report (seed, counts, findings with their saved inputs) when anything was found.</summary>
    public static void NoFindings(FuzzReport report)
    {
        Assert.True(report.Inputs > 0, $"no input ran: {report}");
        Assert.True(report.Findings.Count == 0, report.ToString());
    }

    /// <summary>
    /// Requires each outcome prefix to have occurred, once the run is long enough: a generator that stopped reaching
    /// the success path (or the error path) would otherwise pass while testing little.
    /// </summary>
    public static void Reached(FuzzReport report, params string[] outcomePrefixes)
    {
        if (report.Inputs < CoverageInputs)
        {
            return;
        }

        foreach (var prefix in outcomePrefixes)
        {
            Assert.True(report.Count(prefix) > 0, $"no input reached the outcome '{prefix}': {report}");
        }
    }
}
