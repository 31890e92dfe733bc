using System.CommandLine;
using FiberWorkers.Algebra.Families;
using FiberWorkers.Atlas.Stores;

namespace FiberWorkers.Cli.Commands;

/// <summary>The FILE argument and the --atlas-id option shared by every command that reads an atlas file.</summary>
internal sealed class AtlasArguments
{
    public AtlasArguments(bool fileOptional = false)
    {
        File = new Argument<string>("FILE") { Description = "The atlas file (written by 'fiber sweep')." };
        if (fileOptional)
        {
            File.Arity = ArgumentArity.ZeroOrOne;
        }
    }

    public Argument<string> File { get; }

    public Option<string?> AtlasId { get; } = new("--atlas-id")
    {
        Description = "The atlas to read when the file holds more than one (see 'fiber atlas').",
    };

    public void AddTo(Command command)
    {
        command.Arguments.Add(File);
        command.Options.Add(AtlasId);
    }

    /// <summary>Opens the file for reading; a missing file, a directory or another kind of file is an input error.</summary>
    public SqliteAtlasStore Open(ParseResult parse)
    {
        var path = parse.GetValue(File)!;
        if (Directory.Exists(path))
        {
            throw new InputException(path, string.Empty, "is a directory, not an atlas file");
        }

        return SqliteAtlasStore.Open(path, create: false);
    }

    /// <summary>A version (the latest when <paramref name="version"/> is null) of the file's atlas.</summary>
    public AtlasSnapshot Load(ParseResult parse, IAtlasStore store, int? version = null) =>
        AtlasSnapshot.Load(store, Path.GetFileName(parse.GetValue(File)!), version, parse.GetValue(AtlasId));

    /// <summary>The --version option of the commands that read one version.</summary>
    public static Option<int?> VersionOption() => new("--version")
    {
        Description = "The atlas version to read (default: the latest; see 'fiber atlas').",
    };
}
