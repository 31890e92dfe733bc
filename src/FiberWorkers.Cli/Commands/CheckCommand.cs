using System.CommandLine;
using System.Globalization;
using System.Text.Json;
using FiberWorkers.Algebra.Families;
using FiberWorkers.Cli.Output;

namespace FiberWorkers.Cli.Commands;

/// <summary><c>fiber check FAMILY [--json]</c>: validates a family and prints its shape.</summary>
internal static class CheckCommand
{
    public static Command Create(TextWriter output)
    {
        var family = new FamilyArguments();
        var json = new Option<bool>("--json") { Description = "Print one JSON object instead of text." };
        var command = new Command("check", "Validate a family file and print its unknowns, parameters, degrees and Bézout number.");
        family.AddTo(command);
        command.Options.Add(json);
        command.SetAction(parse =>
        {
            var definition = family.Load(parse);
            if (parse.GetValue(json))
            {
                JsonOutput.Write(output, writer => WriteJson(writer, definition));
            }
            else
            {
                WriteText(output, definition);
            }

            return CommandLine.Success;
        });
        return command;
    }

    private static void WriteText(TextWriter output, FamilyDefinition family)
    {
        var system = family.System;
        output.WriteLine($"family      {family.Name}");
        output.WriteLine($"unknowns    {string.Join(", ", family.Unknowns)}");
        if (family.Parameters.Count == 0)
        {
            output.WriteLine("parameters  none (a single system)");
        }

        for (var k = 0; k < family.Parameters.Count; k++)
        {
            var p = family.Parameters[k];
            var label = k == 0 ? "parameters" : string.Empty;
            output.WriteLine(string.Create(CultureInfo.InvariantCulture, $"{label,-11} {p.Name} in [{p.Low:R}, {p.High:R}]"));
        }

        if (family.Constants.Count > 0)
        {
            output.WriteLine(
                $"constants   {string.Join(", ", family.Constants.Select(c => string.Create(CultureInfo.InvariantCulture, $"{c.Key} = {c.Value:R}")))}");
        }

        output.WriteLine($"equations   {system.Equations.Count}");
        for (var i = 0; i < system.Equations.Count; i++)
        {
            output.WriteLine($"  {i + 1,3}  degree {system.Degrees[i],2}  {system.Equations[i].TermCount,5} terms  {family.EquationTexts[i]}");
        }

        output.WriteLine($"bezout      {system.BezoutNumber} (product of the degrees {string.Join(" x ", system.Degrees)})");
        if (family.RootCount is { } rootCount)
        {
            output.WriteLine($"root count  {rootCount} (expected, from the family file)");
        }

        output.WriteLine($"content     {family.ContentHash}");
    }

    private static void WriteJson(Utf8JsonWriter writer, FamilyDefinition family)
    {
        var system = family.System;
        writer.WriteStartObject();
        writer.WriteString("family", family.Name);
        writer.WriteStartArray("unknowns");
        foreach (var name in family.Unknowns)
        {
            writer.WriteStringValue(name);
        }

        writer.WriteEndArray();
        writer.WriteStartArray("parameters");
        foreach (var p in family.Parameters)
        {
            writer.WriteStartObject();
            writer.WriteString("name", p.Name);
            writer.WriteNumber("low", p.Low);
            writer.WriteNumber("high", p.High);
            writer.WriteEndObject();
        }

        writer.WriteEndArray();
        writer.WriteStartObject("constants");
        foreach (var (name, value) in family.Constants)
        {
            writer.WriteNumber(name, value);
        }

        writer.WriteEndObject();
        writer.WriteStartArray("degrees");
        foreach (var d in system.Degrees)
        {
            writer.WriteNumberValue(d);
        }

        writer.WriteEndArray();
        writer.WritePropertyName("bezout");
        writer.WriteRawValue(system.BezoutNumber.ToString(CultureInfo.InvariantCulture));
        if (family.RootCount is { } rootCount)
        {
            writer.WriteNumber("rootCount", rootCount);
        }

        writer.WriteString("contentHash", family.ContentHash);
        writer.WriteEndObject();
    }
}
