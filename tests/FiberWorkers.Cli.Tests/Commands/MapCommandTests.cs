using System.Buffers.Binary;

namespace FiberWorkers.Cli.Tests.Commands;

public sealed class MapCommandTests
{
    [Fact]
    public async Task Map_writes_a_png_of_the_requested_size_and_reports_its_legend()
    {
        var atlas = await AtlasFiles.CubicAsync();
        var png = Path.Combine(AtlasFiles.Folder(), "maps", "cubic.png");

        var (code, output, error) = await CliRunner.RunAsync("map", atlas.Path, "--out", png, "--width", "500", "--height", "400");

        Assert.True(code == 0, error);
        var bytes = await File.ReadAllBytesAsync(png);
        Assert.Equal([137, 80, 78, 71, 13, 10, 26, 10], bytes[..8]);
        Assert.Equal("IHDR", System.Text.Encoding.ASCII.GetString(bytes, 12, 4));
        Assert.Equal(500u, BinaryPrimitives.ReadUInt32BigEndian(bytes.AsSpan(16)));
        Assert.Equal(400u, BinaryPrimitives.ReadUInt32BigEndian(bytes.AsSpan(20)));
        Assert.Contains("axes        b in [-3, 1] (x), c in [-2, 2] (y)", output, StringComparison.Ordinal);
        Assert.Contains("  1 real    #", output, StringComparison.Ordinal);
        Assert.Contains("  3 real    #", output, StringComparison.Ordinal);
        Assert.Contains($"samples     {atlas.Summaries[1].GetProperty("samples").GetInt64()} shown", output, StringComparison.Ordinal);
        Assert.False(File.Exists(png + ".partial"));
    }

    [Fact]
    public async Task Map_of_an_earlier_version_with_swapped_axes()
    {
        var atlas = await AtlasFiles.CubicAsync();
        var png = Path.Combine(AtlasFiles.Folder(), "swapped.png");

        var (code, output, error) = await CliRunner.RunAsync("map", atlas.Path, "--out", png, "--x", "c", "--y", "b", "--version", "1", "--width", "300", "--height", "300");

        Assert.True(code == 0, error);
        Assert.Contains("version 1", output, StringComparison.Ordinal);
        Assert.Contains("axes        c in [-2, 2] (x), b in [-3, 1] (y)", output, StringComparison.Ordinal);
        Assert.Contains($"samples     {atlas.Summaries[0].GetProperty("samples").GetInt64()} shown", output, StringComparison.Ordinal);
    }

    [Theory]
    [InlineData("--x", "B", "--x: 'B': is not a parameter of this family (did you mean 'b'?); parameters: b, c")]
    [InlineData("--y", "cc", "--y: 'cc': is not a parameter of this family (did you mean 'c'?); parameters: b, c")]
    [InlineData("--fix", "b=0", "--fix: 'b': is an axis of the map (--x); fix only the other parameters")]
    [InlineData("--fix", "c", "--fix: item 1 'c': expected NAME=VALUE")]
    [InlineData("--fix", "d=1,d=2", "--fix: item 2 'd=2': parameter 'd' is given twice")]
    [InlineData("--version", "5", "cubic.db: --version: no version 5; versions: 1, 2")]
    public async Task Bad_input_exits_with_one_and_names_the_option(string option, string value, string message)
    {
        var atlas = await AtlasFiles.CubicAsync();
        var png = Path.Combine(AtlasFiles.Folder(), "bad.png");

        var (code, output, error) = await CliRunner.RunAsync("map", atlas.Path, "--out", png, option, value);

        Assert.Equal(1, code);
        Assert.Equal(string.Empty, output);
        Assert.Equal(message, error.Trim());
        Assert.False(File.Exists(png));
    }

    [Theory]
    [InlineData("--x", "b", "--y", "b")]
    [InlineData("--width", "50")]
    [InlineData("--height", "90000")]
    public async Task Bad_usage_exits_with_two(params string[] options)
    {
        var atlas = await AtlasFiles.CubicAsync();

        var (code, _, error) = await CliRunner.RunAsync(["map", atlas.Path, "--out", Path.Combine(AtlasFiles.Folder(), "m.png"), .. options]);

        Assert.Equal(2, code);
        Assert.StartsWith("fiber: ", error, StringComparison.Ordinal);
    }

    [Fact]
    public async Task An_unwritable_out_is_an_input_error_naming_the_path()
    {
        var atlas = await AtlasFiles.CubicAsync();
        var file = Path.Combine(AtlasFiles.Folder(), "plain.txt");
        await File.WriteAllTextAsync(file, "a file, not a directory");
        var target = Path.Combine(file, "map.png");

        var underFile = await CliRunner.RunAsync("map", atlas.Path, "--out", target);
        var onDirectory = await CliRunner.RunAsync("map", atlas.Path, "--out", Path.GetDirectoryName(file)!);

        Assert.Equal(1, underFile.ExitCode);
        Assert.StartsWith($"{target}: cannot write the image (", underFile.Error, StringComparison.Ordinal);
        Assert.Equal(1, onDirectory.ExitCode);
        Assert.Equal($"{Path.GetDirectoryName(file)}: is a directory; --out names the PNG file to write", onDirectory.Error.Trim());
        Assert.DoesNotContain("   at ", underFile.Error, StringComparison.Ordinal);
    }

    [Fact]
    public async Task A_missing_atlas_file_is_an_input_error()
    {
        var missing = Path.Combine(AtlasFiles.Folder(), "none.db");

        var (code, _, error) = await CliRunner.RunAsync("map", missing, "--out", Path.Combine(AtlasFiles.Folder(), "m.png"));

        Assert.Equal(1, code);
        Assert.Equal($"{missing}: no such atlas file", error.Trim());
    }
}
