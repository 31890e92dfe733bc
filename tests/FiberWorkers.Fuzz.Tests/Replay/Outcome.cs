using System.Globalization;
using FiberWorkers.Algebra.Families;
using FiberWorkers.Fuzz.Tests.Decoding;
using FiberWorkers.Fuzz.Tests.Families;
using FiberWorkers.Fuzz.Tests.StartFibers;
using FiberWorkers.Solving.StartFibers;
using Google.Protobuf;

namespace FiberWorkers.Fuzz.Tests.Replay;

/// <summary>
/// The outcome of reading a corpus or regression file, as the text its <c>.expected</c> file holds: a summary of what
/// was read, or the exact error message. Reading also runs the fuzz property, so a replayed file is checked both ways.
/// </summary>
internal static class Outcome
{
    /// <summary>The kind of file, from its name: <c>*.family.json</c> (or any <c>*.json</c> in the family corpus), <c>*.start-fiber.json</c>, <c>*.MessageName.pb</c>.</summary>
    public static string Of(string path)
    {
        var name = Path.GetFileName(path);
        var bytes = File.ReadAllBytes(path);
        if (name.EndsWith(".start-fiber.json", StringComparison.Ordinal))
        {
            return StartFiber(bytes, name);
        }

        if (name.EndsWith(".pb", StringComparison.Ordinal))
        {
            var message = name[..^".pb".Length];
            return Message(bytes, DecodingTargets.Get(message[(message.LastIndexOf('.') + 1)..]));
        }

        if (name.EndsWith(".json", StringComparison.Ordinal))
        {
            return Family(bytes, name);
        }

        throw new InvalidOperationException($"{name}: not a corpus file (expected *.family.json, *.start-fiber.json or *.MessageName.pb)");
    }

    private static string Family(byte[] bytes, string source)
    {
        FamilyProperty.Check(bytes, source, FamilyLimits.Default);
        FamilyDefinition family;
        try
        {
            family = FamilyReader.Parse(bytes, source);
        }
        catch (InputException e)
        {
            return e.Message.ReplaceLineEndings("\n");
        }

        var system = family.System;
        var parameters = family.Parameters.Select(p => string.Create(CultureInfo.InvariantCulture, $"{p.Name} in [{p.Low:R}, {p.High:R}]"));
        return string.Create(
            CultureInfo.InvariantCulture,
            $"valid: family '{family.Name}'; unknowns {string.Join(", ", system.Unknowns)}; parameters {List(parameters)}; "
            + $"constants {List(family.Constants.Keys)}; degrees {string.Join(", ", system.Degrees)}; "
            + $"terms {string.Join(", ", system.Equations.Select(e => e.TermCount))}; root count {family.RootCount?.ToString(CultureInfo.InvariantCulture) ?? "not given"}");
    }

    private static string StartFiber(byte[] bytes, string source)
    {
        StartFiber fiber;
        try
        {
            fiber = StartFiberFile.Deserialize(bytes, source);
        }
        catch (InputException e)
        {
            return e.Message.ReplaceLineEndings("\n");
        }

        StartFiberProperty.Check(bytes);
        return string.Create(
            CultureInfo.InvariantCulture,
            $"valid: family {fiber.FamilyHash}; unknowns {List(fiber.Unknowns)}; {fiber.Parameters.Length} parameters; "
            + $"{fiber.Solutions.Count} solutions; method '{fiber.Provenance.Method}'");
    }

    private static string Message(byte[] bytes, MessageFuzzTarget target)
    {
        var outcome = MessageProperty.Check(target, bytes);
        try
        {
            return $"{outcome}: {target.Parser.ParseFrom(bytes)}";
        }
        catch (InvalidProtocolBufferException e)
        {
            return $"{outcome}: {e.Message}";
        }
    }

    private static string List(IEnumerable<string> items) => items.Any() ? string.Join(", ", items) : "none";
}
