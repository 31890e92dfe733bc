using System.Globalization;
using System.Numerics;
using System.Text.Json;
using FiberWorkers.Algebra.Families;
using FiberWorkers.Solving.Certification;
using FiberWorkers.Solving.Fibers;

namespace FiberWorkers.Cli.Output;

/// <summary>Text and JSON renderings of a solved fiber, shared by the commands that print solutions.</summary>
internal static class FiberOutput
{
    public const string Caution =
        "caution: a planning aid, not a substitute for engineering studies; defer to local codes and licensed practice.";

    /// <summary>Writes the <c>solutions</c> array: values (name → [re, im]), real, certified, residual.</summary>
    public static void WriteSolutions(Utf8JsonWriter writer, IReadOnlyList<string> unknowns, IEnumerable<FiberPoint> solutions)
    {
        writer.WriteStartArray("solutions");
        foreach (var solution in solutions)
        {
            writer.WriteStartObject();
            writer.WriteStartObject("values");
            for (var i = 0; i < unknowns.Count; i++)
            {
                writer.WriteStartArray(unknowns[i]);
                writer.WriteNumberValue(solution.Values[i].Real);
                writer.WriteNumberValue(solution.Values[i].Imaginary);
                writer.WriteEndArray();
            }

            writer.WriteEndObject();
            writer.WriteBoolean("real", solution.IsReal);
            writer.WriteBoolean("certified", solution.Certified);
            writer.WriteNumber("residual", Finite(solution.Residual));
            writer.WriteNumber("condition", Finite(solution.Condition));
            writer.WriteNumber("alpha", Finite(solution.Certificate.Alpha));
            writer.WriteEndObject();
        }

        writer.WriteEndArray();
    }

    /// <summary>Writes <c>pathStatus</c>: counts per status, and <c>failures</c>: counts per failure reason.</summary>
    public static void WritePathStatus(Utf8JsonWriter writer, FiberSolution solution)
    {
        writer.WriteStartObject("pathStatus");
        foreach (var status in Enum.GetValues<PathStatus>())
        {
            writer.WriteNumber(status.Name(), solution.StatusCounts[status]);
        }

        writer.WriteEndObject();
        writer.WriteStartObject("failures");
        foreach (var group in solution.Paths.Where(p => p.Status == PathStatus.Failed).GroupBy(p => p.Failure).OrderBy(g => g.Key))
        {
            writer.WriteNumber(group.Key.Name(), group.Count());
        }

        writer.WriteEndObject();
    }

    /// <summary>A readable table of the real solutions and the counts.</summary>
    public static void WriteText(TextWriter output, FamilyDefinition family, FiberSolution solution)
    {
        var counts = solution.StatusCounts;
        output.WriteLine(
            $"paths       {solution.PathsTracked} tracked: {counts[PathStatus.Regular]} regular, {counts[PathStatus.Singular]} singular, "
            + $"{counts[PathStatus.AtInfinity]} at infinity, {counts[PathStatus.Failed]} failed");
        foreach (var group in solution.Paths.Where(p => p.Status == PathStatus.Failed).GroupBy(p => p.Failure))
        {
            output.WriteLine($"            {group.Count()} failed: {group.Key.Name()}");
        }

        var real = solution.RealSolutions.ToArray();
        output.WriteLine($"solutions   {solution.RootCount} distinct finite: {real.Length} real, {solution.RootCount - real.Length} non-real");
        output.WriteLine($"real count  {solution.RealCount} ({(solution.RealCountCertified ? "certified" : "not certified")})");
        if (!solution.RealCountCertified)
        {
            output.WriteLine($"            {WhyNotCertified(solution)}");
        }

        if (real.Length > 0)
        {
            output.WriteLine();
            var header = string.Join("  ", family.Unknowns.Select(u => $"{u,14}"));
            output.WriteLine($"  #  {header}  {"residual",9}  certified");
            for (var k = 0; k < real.Length; k++)
            {
                var row = string.Join("  ", real[k].Values.Select(v => string.Create(CultureInfo.InvariantCulture, $"{v.Real,14:G10}")));
                var certified = real[k].Certified ? "yes" : "no";
                output.WriteLine(string.Create(CultureInfo.InvariantCulture, $"{k + 1,3}  {row}  {real[k].Residual,9:E1}  {certified}"));
            }
        }

        output.WriteLine();
        output.WriteLine($"note: {Certificate.FloatingPointCaveat}.");
        output.WriteLine(Caution);
    }

    /// <summary>One sentence on why a count is not certified.</summary>
    public static string WhyNotCertified(FiberSolution solution)
    {
        var reasons = new List<string>();
        if (solution.Parameters.Any(p => p.Imaginary != 0))
        {
            reasons.Add("the parameter point is not real");
        }

        if (solution.StatusCounts[PathStatus.Failed] > 0)
        {
            reasons.Add($"{solution.StatusCounts[PathStatus.Failed]} path(s) failed");
        }

        if (solution.StatusCounts[PathStatus.Singular] > 0)
        {
            reasons.Add($"{solution.StatusCounts[PathStatus.Singular]} path(s) ended at singular solutions");
        }

        if (solution.UncertainInfinityPaths > 0)
        {
            reasons.Add($"{solution.UncertainInfinityPaths} path(s) were judged at infinity from their decay alone (an ill-conditioned finite solution looks the same)");
        }

        var uncertified = solution.Solutions.Count(s => !s.Certified);
        if (uncertified > 0)
        {
            reasons.Add($"{uncertified} solution(s) could not be certified in double precision (ill-conditioned: near the discriminant)");
        }

        return string.Join("; ", reasons);
    }

    /// <summary>JSON cannot carry infinities; they are written as a large number.</summary>
    public static double Finite(double value) => double.IsNaN(value) ? -1 : double.IsFinite(value) ? value : double.MaxValue;

    /// <summary>Real parameter values as complex numbers.</summary>
    public static Complex[] ToComplex(ReadOnlySpan<double> values)
    {
        var result = new Complex[values.Length];
        for (var k = 0; k < values.Length; k++)
        {
            result[k] = values[k];
        }

        return result;
    }
}
