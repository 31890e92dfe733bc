using System.Numerics;
using System.Text.RegularExpressions;
using FiberWorkers.Algebra.Families;
using FiberWorkers.Fuzz.Tests.Engine;
using FiberWorkers.Solving.StartFibers;

namespace FiberWorkers.Fuzz.Tests.StartFibers;

/// <summary>
/// The property of start-fiber files: loading either gives a fiber whose solutions have one finite entry per
/// unknown and which survives saving and loading again unchanged, or fails with an <see cref="InputException"/>
/// naming the source and the place (a line and column, or the field) — never another exception.
/// </summary>
internal static partial class StartFiberProperty
{
    /// <summary>The source name the fuzz inputs are read under.</summary>
    public const string Source = "fuzz.start-fiber.json";

    public static string Check(byte[] bytes)
    {
        StartFiber fiber;
        try
        {
            fiber = StartFiberFile.Deserialize(bytes, Source);
        }
        catch (InputException e)
        {
            foreach (var problem in e.Problems)
            {
                if (problem.Source != Source || string.IsNullOrWhiteSpace(problem.Message))
                {
                    throw new FuzzViolation($"a start-fiber problem without its source or a message: {problem}");
                }

                if (problem.Location.Length == 0 ? !problem.Message.StartsWith("not a start fiber", StringComparison.Ordinal)
                    : !LocationPattern().IsMatch(problem.Location))
                {
                    throw new FuzzViolation($"a start-fiber problem at an unexpected location '{problem.Location}': {problem}");
                }
            }

            var location = e.Problems[0].Location;
            return "invalid: " + (location.StartsWith("line ", StringComparison.Ordinal) ? "JSON"
                : location.StartsWith("byte ", StringComparison.Ordinal) ? "UTF-8"
                : location.Length == 0 ? "file" : location.Split('[', '.')[0]);
        }

        foreach (var solution in fiber.Solutions)
        {
            if (solution.Length != fiber.Unknowns.Count || solution.Any(z => !double.IsFinite(z.Real) || !double.IsFinite(z.Imaginary)))
            {
                throw new FuzzViolation($"a loaded solution with {solution.Length} entries for {fiber.Unknowns.Count} unknowns, or not finite");
            }
        }

        var again = StartFiberFile.Deserialize(StartFiberFile.Serialize(fiber), Source);
        if (again.FamilyHash != fiber.FamilyHash
            || !again.Unknowns.SequenceEqual(fiber.Unknowns)
            || !Same(again.Parameters, fiber.Parameters)
            || again.Solutions.Count != fiber.Solutions.Count
            || again.Solutions.Zip(fiber.Solutions).Any(pair => !Same(pair.First, pair.Second))
            || again.Provenance != fiber.Provenance)
        {
            throw new FuzzViolation("a start fiber changed when saved and loaded again");
        }

        return "valid";
    }

    // Bitwise, so that -0 and 0 count as different (the file must keep what it was given).
    private static bool Same(Complex[] a, Complex[] b) =>
        a.Length == b.Length && a.Zip(b).All(pair =>
            BitConverter.DoubleToInt64Bits(pair.First.Real) == BitConverter.DoubleToInt64Bits(pair.Second.Real)
            && BitConverter.DoubleToInt64Bits(pair.First.Imaginary) == BitConverter.DoubleToInt64Bits(pair.Second.Imaginary));

    [GeneratedRegex(@"^(line [0-9]+, column [0-9]+|byte [0-9]+|format|version|familyHash|provenance(\.[a-zA-Z]+)?|method|seed|pathsTracked|completeness|note|unknowns(\[[0-9]+\])?|parameters(\[[0-9]+\])?|solutions(\[[0-9]+\](\[[0-9]+\])?)?)$")]
    private static partial Regex LocationPattern();
}
