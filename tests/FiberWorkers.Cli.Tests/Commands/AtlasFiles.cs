using System.Text.Json;

namespace FiberWorkers.Cli.Tests.Commands;

/// <summary>
/// A small cubic atlas made through the CLI once per test run: version 1 from a 3x3-tile, 2-line sweep and version
/// 2 from the same sweep refined one level, with the --json summaries the sweeps printed. Read-only for the tests.
/// </summary>
internal static class AtlasFiles
{
    private static readonly Lazy<Task<SweptAtlas>> Cubic = new(() => SweepAsync());

    public static Task<SweptAtlas> CubicAsync() => Cubic.Value;

    /// <summary>A fresh directory of its own, deleted when the test run ends.</summary>
    public static string Folder()
    {
        var folder = Directory.CreateTempSubdirectory("fiber-cli-atlas-").FullName;
        AppDomain.CurrentDomain.ProcessExit += (_, _) =>
        {
            try
            {
                Directory.Delete(folder, recursive: true);
            }
            catch (IOException)
            {
                // Unique name; the system's temp cleaning takes it otherwise.
            }
        };
        return folder;
    }

    private static async Task<SweptAtlas> SweepAsync()
    {
        var path = Path.Combine(Folder(), "cubic.db");
        var summaries = new List<JsonElement>();
        foreach (var refine in new[] { "0", "1" })
        {
            var (code, output, error) = await CliRunner.RunAsync(
                "sweep", "--example", "cubic", "--atlas", path, "--tiles", "3x3", "--lines", "2", "--refine-depth", refine, "--threads", "2", "--json");
            Assert.True(code == 0, error);
            summaries.Add(JsonDocument.Parse(output).RootElement.Clone());
        }

        return new SweptAtlas(path, summaries);
    }
}

/// <summary>An atlas file and the sweep summaries of its versions, oldest first.</summary>
internal sealed record SweptAtlas(string Path, IReadOnlyList<JsonElement> Summaries);
