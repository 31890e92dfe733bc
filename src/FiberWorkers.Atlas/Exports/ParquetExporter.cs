using FiberWorkers.Atlas.Stores;
using Parquet;
using Parquet.Schema;

namespace FiberWorkers.Atlas.Exports;

/// <summary>
/// Writes an atlas version as <c>samples.parquet</c> and <c>crossings.parquet</c> (Apache Parquet, Snappy
/// compressed, required columns: parameters and <c>s</c> as DOUBLE, <c>label</c>, <c>version</c> and <c>line</c>
/// as INT32, <c>certified</c> as BOOLEAN, <c>kind</c> and <c>tile</c> as UTF-8 strings), readable by pandas and
/// Arrow. Row groups hold at most <see cref="RowGroupSize"/> rows.
/// </summary>
public static class ParquetExporter
{
    /// <summary>Rows per row group (1,048,576).</summary>
    public const int RowGroupSize = 1 << 20;

    /// <summary>Writes both tables into <paramref name="directory"/> (created when absent).</summary>
    public static async Task<ExportResult> ExportAsync(AtlasSnapshot snapshot, string directory, CancellationToken cancellation = default)
    {
        ArgumentNullException.ThrowIfNull(snapshot);
        var root = ExportFiles.PrepareDirectory(directory);
        var files = new List<ExportedFile>();
        foreach (var table in new[] { ExportTable.Samples(snapshot), ExportTable.Crossings(snapshot) })
        {
            var path = Path.Combine(root, $"{table.Name}.parquet");
            await ExportFiles.WriteAsync(path, stream => WriteAsync(stream, table, cancellation)).ConfigureAwait(false);
            files.Add(new ExportedFile(path, table.Name, table.Rows, [.. table.Columns.Select(c => c.Name)]));
        }

        return new ExportResult(snapshot.AtlasId, snapshot.Version.Version, files);
    }

    /// <summary>The Parquet schema of a table.</summary>
    internal static ParquetSchema SchemaOf(ExportTable table) => new(table.Columns.Select(FieldOf));

    private static async Task WriteAsync(Stream stream, ExportTable table, CancellationToken cancellation)
    {
        var schema = SchemaOf(table);
        var fields = schema.GetDataFields();
        await using var writer = await ParquetWriter.CreateAsync(schema, stream, cancellationToken: cancellation).ConfigureAwait(false);
        // An empty table still gets one (empty) row group, so readers see the schema and zero rows.
        for (var start = 0; start < Math.Max(1, table.Rows); start += RowGroupSize)
        {
            var count = Math.Min(RowGroupSize, table.Rows - start);
            using var group = writer.CreateRowGroup();
            for (var c = 0; c < table.Columns.Count; c++)
            {
                var column = table.Columns[c];
                switch (column.Type)
                {
                    case ExportColumnType.Double:
                        await group.WriteAsync<double>(fields[c], ((double[])column.Values).AsMemory(start, count), cancellationToken: cancellation).ConfigureAwait(false);
                        break;
                    case ExportColumnType.Int32:
                        await group.WriteAsync<int>(fields[c], ((int[])column.Values).AsMemory(start, count), cancellationToken: cancellation).ConfigureAwait(false);
                        break;
                    case ExportColumnType.Boolean:
                        await group.WriteAsync<bool>(fields[c], ((bool[])column.Values).AsMemory(start, count), cancellationToken: cancellation).ConfigureAwait(false);
                        break;
                    default:
                        await group.WriteAsync(fields[c], new ArraySegment<string>((string[])column.Values, start, count)).ConfigureAwait(false);
                        break;
                }
            }
        }
    }

    private static DataField FieldOf(ExportColumn column) => column.Type switch
    {
        ExportColumnType.Double => new DataField<double>(column.Name, nullable: false),
        ExportColumnType.Int32 => new DataField<int>(column.Name, nullable: false),
        ExportColumnType.Boolean => new DataField<bool>(column.Name, nullable: false),
        _ => new DataField<string>(column.Name, nullable: false),
    };
}
