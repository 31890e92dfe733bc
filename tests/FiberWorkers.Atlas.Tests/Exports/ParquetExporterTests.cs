using FiberWorkers.Atlas.Exports;
using FiberWorkers.Atlas.Sweeps;
using FiberWorkers.Testing;
using Parquet;
using Parquet.Schema;

namespace FiberWorkers.Atlas.Tests.Exports;

public sealed class ParquetExporterTests
{
    [Fact]
    public async Task Samples_parquet_reads_back_with_the_schema_and_the_snapshot_values()
    {
        var snapshot = SmallAtlases.Cubic;
        using var folder = SmallAtlases.Folder();

        var result = await ParquetExporter.ExportAsync(snapshot, folder.Path);

        var path = Path.Combine(folder.Path, "samples.parquet");
        Assert.Equal(path, result.Files[0].Path);
        await using var stream = File.OpenRead(path);
        await using var reader = await ParquetReader.CreateAsync(stream);
        var fields = reader.Schema.GetDataFields();
        Assert.Equal(["b", "c", "label", "kind", "tile", "version", "certified", "line", "s"], fields.Select(f => f.Name));
        Assert.Equal(
            ["b:DOUBLE", "c:DOUBLE", "label:INT32", "kind:BYTE_ARRAY/STRING", "tile:BYTE_ARRAY/STRING", "version:INT32", "certified:BOOLEAN", "line:INT32", "s:DOUBLE"],
            PhysicalColumns(reader));
        Assert.All(fields, f => Assert.False(f.IsNullable));
        Assert.Equal(1, reader.RowGroupCount);
        using var group = reader.OpenRowGroupReader(0);
        var rows = checked((int)group.RowCount);
        Assert.Equal(snapshot.Samples.Count, rows);

        var b = await ReadAsync<double>(group, fields[0], rows);
        var c = await ReadAsync<double>(group, fields[1], rows);
        var label = await ReadAsync<int>(group, fields[2], rows);
        var kind = await ReadStringsAsync(group, fields[3], rows);
        var tile = await ReadStringsAsync(group, fields[4], rows);
        var version = await ReadAsync<int>(group, fields[5], rows);
        var certified = await ReadAsync<bool>(group, fields[6], rows);
        var line = await ReadAsync<int>(group, fields[7], rows);
        var s = await ReadAsync<double>(group, fields[8], rows);
        for (var i = 0; i < rows; i++)
        {
            var (key, sample) = snapshot.Samples[i];
            Assert.Equal(sample.Point[0], b[i]);
            Assert.Equal(sample.Point[1], c[i]);
            Assert.Equal(sample.Label, label[i]);
            Assert.Equal(AtlasContent.KindName(sample.Kind), kind[i]);
            Assert.Equal(key, tile[i]);
            Assert.Equal(snapshot.Version.Version, version[i]);
            Assert.Equal(sample.Certified, certified[i]);
            Assert.Equal(sample.Line, line[i]);
            Assert.Equal(sample.S, s[i]);
        }
    }

    [Fact]
    public async Task Crossings_parquet_reads_back_with_the_schema_and_the_snapshot_values()
    {
        var snapshot = SmallAtlases.Cubic;
        using var folder = SmallAtlases.Folder();

        await ParquetExporter.ExportAsync(snapshot, folder.Path);

        await using var reader = await ParquetReader.CreateAsync(Path.Combine(folder.Path, "crossings.parquet"));
        var fields = reader.Schema.GetDataFields();
        Assert.Equal(["b", "c", "kind", "tile", "version", "s", "line"], fields.Select(f => f.Name));
        Assert.Equal(
            ["b:DOUBLE", "c:DOUBLE", "kind:BYTE_ARRAY/STRING", "tile:BYTE_ARRAY/STRING", "version:INT32", "s:DOUBLE", "line:INT32"],
            PhysicalColumns(reader));
        using var group = reader.OpenRowGroupReader(0);
        var rows = checked((int)group.RowCount);
        Assert.Equal(snapshot.Crossings.Count, rows);
        var b = await ReadAsync<double>(group, fields[0], rows);
        var kind = await ReadStringsAsync(group, fields[2], rows);
        var tile = await ReadStringsAsync(group, fields[3], rows);
        var s = await ReadAsync<double>(group, fields[5], rows);
        for (var i = 0; i < rows; i++)
        {
            var (key, crossing) = snapshot.Crossings[i];
            Assert.Equal(crossing.Point[0], b[i]);
            Assert.Equal(AtlasContent.KindName(crossing.Kind), kind[i]);
            Assert.Equal(key, tile[i]);
            Assert.Equal(crossing.S, s[i]);
        }
    }

    [Fact]
    public async Task Three_parameters_give_three_parameter_columns_and_no_partial_files_remain()
    {
        var snapshot = SmallAtlases.Slab;
        using var folder = SmallAtlases.Folder();

        await ParquetExporter.ExportAsync(snapshot, folder.Path);

        await using var reader = await ParquetReader.CreateAsync(Path.Combine(folder.Path, "samples.parquet"));
        Assert.Equal(["a", "b", "c", "label"], reader.Schema.GetDataFields().Take(4).Select(f => f.Name));
        Assert.Equal(["crossings.parquet", "samples.parquet"], Directory.GetFiles(folder.Path).Select(Path.GetFileName).Order(StringComparer.Ordinal));
    }

    [Fact]
    public async Task A_version_without_crossings_exports_an_empty_crossings_table_with_its_schema()
    {
        // x² + a² + b² + 1 has no real solution anywhere: no crossings, every sample labeled 0.
        var family = TestFamilies.Build("nothing real", ["x"], ["x^2 + a^2 + b^2 + 1"], [("a", -1, 1), ("b", -1, 1)]);
        var snapshot = SmallAtlases.Sweep(family, [1, 1], 1);
        Assert.Empty(snapshot.Crossings);
        using var folder = SmallAtlases.Folder();

        await ParquetExporter.ExportAsync(snapshot, folder.Path);
        await CsvExporter.ExportAsync(snapshot, folder.Path);

        await using var reader = await ParquetReader.CreateAsync(Path.Combine(folder.Path, "crossings.parquet"));
        Assert.Equal(["a", "b", "kind", "tile", "version", "s", "line"], reader.Schema.GetDataFields().Select(f => f.Name));
        Assert.Equal(0, reader.Metadata!.NumRows);
        Assert.Equal("a,b,kind,tile,version,s,line\r\n", await File.ReadAllTextAsync(Path.Combine(folder.Path, "crossings.csv")));
    }

    /// <summary>"name:PHYSICAL" or "name:PHYSICAL/LOGICAL" per column, from the file's own schema elements; every column REQUIRED.</summary>
    private static IEnumerable<string> PhysicalColumns(ParquetReader reader)
    {
        var columns = reader.Metadata!.Schema.Skip(1).ToArray();
        Assert.All(columns, c => Assert.Equal(Parquet.Meta.FieldRepetitionType.REQUIRED, c.RepetitionType));
        return columns.Select(c => c.LogicalType?.STRING is null ? $"{c.Name}:{c.Type}" : $"{c.Name}:{c.Type}/STRING");
    }

    private static async Task<T[]> ReadAsync<T>(ParquetRowGroupReader group, DataField field, int rows)
        where T : struct
    {
        var values = new T[rows];
        await group.ReadAsync<T>(field, values.AsMemory());
        return values;
    }

    private static async Task<string?[]> ReadStringsAsync(ParquetRowGroupReader group, DataField field, int rows)
    {
        var values = new string?[rows];
        await group.ReadAsync(field, values.AsMemory());
        return values;
    }
}
