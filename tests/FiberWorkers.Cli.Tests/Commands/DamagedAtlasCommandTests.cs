using FiberWorkers.Solving.Randomness;

namespace FiberWorkers.Cli.Tests.Commands;

/// <summary>
/// `fiber atlas` and `fiber ask` on truncated and bit-flipped copies of a real atlas file: exit code 1 with one line
/// naming the file and no stack trace, or (a flip in unused space) exactly the output of the intact file.
/// </summary>
public sealed class DamagedAtlasCommandTests
{
    private const int PageSize = 4096;

    public static TheoryData<string> Commands => new() { "atlas", "ask" };

    [Theory]
    [MemberData(nameof(Commands))]
    public async Task A_truncated_atlas_file_is_refused_with_one_line_naming_the_file(string command)
    {
        var atlas = await AtlasFiles.CubicAsync();
        var bytes = await File.ReadAllBytesAsync(atlas.Path);
        var random = new SeededRandom(20261204);
        int[] lengths = [0, 1, 60, 100, PageSize, PageSize + 100, bytes.Length / 2, bytes.Length - PageSize, bytes.Length - 1, 1 + random.NextInt(bytes.Length - 1), 1 + random.NextInt(bytes.Length - 1)];
        var folder = AtlasFiles.Folder();

        var failures = new List<string>();
        foreach (var length in lengths)
        {
            var path = Path.Combine(folder, $"truncated-{command}-{length}.db");
            await File.WriteAllBytesAsync(path, bytes[..length]);

            var (code, output, error) = await Run(command, path);

            if (Problem(code, error, Path.GetFileName(path)) is { } problem)
            {
                failures.Add($"truncated to {length} of {bytes.Length} bytes: {problem}; stdout: {output}");
            }
        }

        Assert.True(failures.Count == 0, string.Join(Environment.NewLine, failures));
    }

    [Theory]
    [MemberData(nameof(Commands))]
    public async Task A_bit_flipped_atlas_file_is_refused_with_one_line_naming_the_file_or_read_as_intact(string command)
    {
        var atlas = await AtlasFiles.CubicAsync();
        var bytes = await File.ReadAllBytesAsync(atlas.Path);
        var folder = AtlasFiles.Folder();
        var intactPath = Path.Combine(folder, $"intact-{command}.db");
        await File.WriteAllBytesAsync(intactPath, bytes);
        var intact = await Run(command, intactPath);
        Assert.True(intact.ExitCode == 0, intact.Error);

        // Page headers of the first pages, the file header, and a seeded spread.
        var random = new SeededRandom(command == "atlas" ? 20261205UL : 20261206UL);
        var positions = new SortedSet<int> { 20, 28, 40, 56, 100, 103, 105, PageSize, PageSize + 3, 2 * PageSize, (2 * PageSize) + 5 };
        while (positions.Count < 40)
        {
            positions.Add(random.NextInt(bytes.Length));
        }

        var failures = new List<string>();
        var refused = 0;
        foreach (var position in positions)
        {
            var damaged = (byte[])bytes.Clone();
            damaged[position] ^= (byte)(1 << (position % 8));
            var path = Path.Combine(folder, $"flipped-{command}-{position}.db");
            await File.WriteAllBytesAsync(path, damaged);

            var (code, output, error) = await Run(command, path);

            if (code == 0)
            {
                // The output names the file it read; everything else must be the intact file's.
                var same = output.Replace(Path.GetFileName(path), "FILE", StringComparison.Ordinal) == intact.Output.Replace(Path.GetFileName(intactPath), "FILE", StringComparison.Ordinal);
                if (!same || error.Length != 0)
                {
                    failures.Add($"byte {position}: exit 0 with other output: {output}{error}");
                }
            }
            else if (Problem(code, error, Path.GetFileName(path)) is { } problem)
            {
                failures.Add($"byte {position}: {problem}");
            }
            else
            {
                refused++;
            }
        }

        Assert.True(failures.Count == 0, string.Join(Environment.NewLine, failures));
        Assert.True(refused > 0, $"none of {positions.Count} flips was detected");
    }

    private static Task<(int ExitCode, string Output, string Error)> Run(string command, string path) => command == "ask"
        ? CliRunner.RunAsync("ask", path, "--at", "b=-2,c=0.5")
        : CliRunner.RunAsync("atlas", path);

    /// <summary>Null when the run exited with 1 and printed one line, beginning with the file's name, and no stack trace.</summary>
    private static string? Problem(int code, string error, string file)
    {
        var lines = error.Split('\n', StringSplitOptions.RemoveEmptyEntries | StringSplitOptions.TrimEntries);
        return code != 1 ? $"exit code {code}: {error}"
            : lines.Length != 1 ? $"{lines.Length} lines on stderr: {error}"
            : !lines[0].StartsWith(file + ":", StringComparison.Ordinal) ? $"the message does not begin with {file}: {error}"
            : lines[0].Contains("Exception", StringComparison.Ordinal) || (lines[0].Contains(" at ", StringComparison.Ordinal) && lines[0].Contains(".cs:", StringComparison.Ordinal)) ? $"a stack trace or exception name: {error}"
            : null;
    }
}
