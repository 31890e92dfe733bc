using System.CommandLine;
using FiberWorkers.Algebra.Families;
using FiberWorkers.Cli.Examples;

namespace FiberWorkers.Cli.Commands;

/// <summary>The FAMILY argument and the --example option shared by every command that reads a family.</summary>
internal sealed class FamilyArguments
{
    public Argument<string?> File { get; } = new("FAMILY")
    {
        Description = "Path of a family file (JSON).",
        Arity = ArgumentArity.ZeroOrOne,
    };

    public Option<string?> Example { get; } = new("--example")
    {
        Description = "Use a bundled example instead of a file (see 'fiber examples').",
    };

    public void AddTo(Command command)
    {
        command.Arguments.Add(File);
        command.Options.Add(Example);
    }

    /// <summary>Reads the family named by the arguments; exactly one of FAMILY and --example must be given.</summary>
    public FamilyDefinition Load(ParseResult parse)
    {
        var file = parse.GetValue(File);
        var example = parse.GetValue(Example);
        if (file is null && example is null)
        {
            throw new UsageException("give a family file or --example NAME");
        }

        if (file is not null && example is not null)
        {
            throw new UsageException("give either a family file or --example NAME, not both");
        }

        return file is not null ? FamilyReader.ReadFile(file) : ExampleCatalog.Load(example!);
    }
}
