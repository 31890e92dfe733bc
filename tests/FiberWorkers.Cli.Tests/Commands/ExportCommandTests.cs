using Parquet;

namespace FiberWorkers.Cli.Tests.Commands;

public sealed class ExportCommandTests
{
    [Fact]
    public async Task Csv_export_writes_both_tables_of_the_latest_version()
    {
        var atlas = await AtlasFiles.CubicAsync();
        var folder = Path.Combine(AtlasFiles.Folder(), "csv");

        var (code, output, error) = await CliRunner.RunAsync("export", atlas.Path, "--format", "csv", "--out", folder);

        Assert.True(code == 0, error);
        var samples = await File.ReadAllLinesAsync(Path.Combine(folder, "samples.csv"));
        var crossings = await File.ReadAllLinesAsync(Path.Combine(folder, "crossings.csv"));
        Assert.Equal("b,c,label,kind,tile,version,certified,line,s", samples[0]);
        Assert.Equal("b,c,kind,tile,version,s,line", crossings[0]);
        Assert.Equal(atlas.Summaries[1].GetProperty("samples").GetInt64(), samples.Length - 1);
        Assert.Equal(atlas.Summaries[1].GetProperty("crossings").GetInt64(), crossings.Length - 1);
        Assert.All(samples.Skip(1), line => Assert.EndsWith(",2,true," + line.Split(',')[^2] + "," + line.Split(',')[^1], line, StringComparison.Ordinal));
        Assert.Contains("atlas       ", output, StringComparison.Ordinal);
        Assert.Contains($"samples     {Path.Combine(folder, "samples.csv")} ({samples.Length - 1} rows;", output, StringComparison.Ordinal);
    }

    [Fact]
    public async Task Parquet_export_of_an_earlier_version_holds_that_versions_samples()
    {
        var atlas = await AtlasFiles.CubicAsync();
        var folder = Path.Combine(AtlasFiles.Folder(), "parquet");

        var (code, _, error) = await CliRunner.RunAsync("export", atlas.Path, "--format", "parquet", "--out", folder, "--version", "1");

        Assert.True(code == 0, error);
        await using var reader = await ParquetReader.CreateAsync(Path.Combine(folder, "samples.parquet"));
        using var group = reader.OpenRowGroupReader(0);
        Assert.Equal(atlas.Summaries[0].GetProperty("samples").GetInt64(), group.RowCount);
        var versions = new int[group.RowCount];
        await group.ReadAsync<int>(reader.Schema.FindDataField("version"), versions.AsMemory());
        Assert.All(versions, v => Assert.Equal(1, v));
        Assert.True(File.Exists(Path.Combine(folder, "crossings.parquet")));
    }

    [Fact]
    public async Task An_unknown_version_is_an_input_error_that_lists_the_versions()
    {
        var atlas = await AtlasFiles.CubicAsync();

        var (code, _, error) = await CliRunner.RunAsync("export", atlas.Path, "--format", "csv", "--out", AtlasFiles.Folder(), "--version", "7");

        Assert.Equal(1, code);
        Assert.Equal("cubic.db: --version: no version 7; versions: 1, 2", error.Trim());
    }

    [Theory]
    [InlineData("--format", "xml")]
    [InlineData("--format")]
    [InlineData]
    public async Task A_bad_or_missing_format_is_bad_usage(params string[] format)
    {
        var atlas = await AtlasFiles.CubicAsync();

        var (code, _, error) = await CliRunner.RunAsync(["export", atlas.Path, "--out", AtlasFiles.Folder(), .. format]);

        Assert.Equal(2, code);
        Assert.StartsWith("fiber: ", error, StringComparison.Ordinal);
        Assert.DoesNotContain("   at ", error, StringComparison.Ordinal);
    }

    [Fact]
    public async Task A_missing_out_is_bad_usage()
    {
        var atlas = await AtlasFiles.CubicAsync();

        var (code, _, error) = await CliRunner.RunAsync("export", atlas.Path, "--format", "csv");

        Assert.Equal(2, code);
        Assert.Contains("--out", error, StringComparison.Ordinal);
    }

    [Fact]
    public async Task An_unwritable_out_is_an_input_error_naming_the_path()
    {
        var atlas = await AtlasFiles.CubicAsync();
        var file = Path.Combine(AtlasFiles.Folder(), "plain.txt");
        await File.WriteAllTextAsync(file, "a file, not a directory");
        var target = Path.Combine(file, "exports");

        var (code, output, error) = await CliRunner.RunAsync("export", atlas.Path, "--format", "parquet", "--out", target);

        Assert.Equal(1, code);
        Assert.Equal(string.Empty, output);
        Assert.StartsWith($"{target}: cannot create the output directory (", error, StringComparison.Ordinal);
        Assert.DoesNotContain("   at ", error, StringComparison.Ordinal);
    }

    [Fact]
    public async Task A_missing_atlas_file_is_an_input_error()
    {
        var missing = Path.Combine(AtlasFiles.Folder(), "none.db");

        var (code, _, error) = await CliRunner.RunAsync("export", missing, "--format", "csv", "--out", AtlasFiles.Folder());

        Assert.Equal(1, code);
        Assert.Equal($"{missing}: no such atlas file", error.Trim());
        Assert.False(File.Exists(missing));
    }
}
