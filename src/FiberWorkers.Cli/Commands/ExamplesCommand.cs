using System.CommandLine;
using FiberWorkers.Cli.Examples;

namespace FiberWorkers.Cli.Commands;

/// <summary><c>fiber examples</c>: lists the bundled example families.</summary>
internal static class ExamplesCommand
{
    public static Command Create(TextWriter output)
    {
        var command = new Command("examples", "List the bundled example families.");
        command.SetAction(_ =>
        {
            foreach (var name in ExampleCatalog.Names)
            {
                var family = ExampleCatalog.Load(name);
                output.WriteLine($"{name,-16} {family.Name} ({Plural(family.Unknowns.Count, "unknown")}, {Plural(family.Parameters.Count, "parameter")})");
            }

            return CommandLine.Success;
        });
        return command;
    }

    private static string Plural(int count, string noun) => count == 1 ? $"1 {noun}" : $"{count} {noun}s";
}
