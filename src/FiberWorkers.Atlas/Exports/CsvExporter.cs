using System.Globalization;
using System.Text;
using FiberWorkers.Atlas.Stores;

namespace FiberWorkers.Atlas.Exports;

/// <summary>
/// Writes an atlas version as <c>samples.csv</c> and <c>crossings.csv</c>: RFC 4180 (comma separated, CRLF line
/// ends, fields with commas, quotes or line breaks quoted), a header row, UTF-8 without a byte-order mark, invariant
/// culture and round-trip doubles, so pandas and Arrow read back the exact values.
/// </summary>
public static class CsvExporter
{
    private static readonly UTF8Encoding Utf8 = new(encoderShouldEmitUTF8Identifier: false);

    /// <summary>Writes both tables into <paramref name="directory"/> (created when absent).</summary>
    public static async Task<ExportResult> ExportAsync(AtlasSnapshot snapshot, string directory, CancellationToken cancellation = default)
    {
        ArgumentNullException.ThrowIfNull(snapshot);
        var root = ExportFiles.PrepareDirectory(directory);
        var files = new List<ExportedFile>();
        foreach (var table in new[] { ExportTable.Samples(snapshot), ExportTable.Crossings(snapshot) })
        {
            cancellation.ThrowIfCancellationRequested();
            var path = Path.Combine(root, $"{table.Name}.csv");
            await ExportFiles.WriteAsync(path, async stream =>
            {
                await using var writer = new StreamWriter(stream, Utf8, 1 << 16) { NewLine = "\r\n" };
                await WriteAsync(writer, table, cancellation).ConfigureAwait(false);
            }).ConfigureAwait(false);
            files.Add(new ExportedFile(path, table.Name, table.Rows, [.. table.Columns.Select(c => c.Name)]));
        }

        return new ExportResult(snapshot.AtlasId, snapshot.Version.Version, files);
    }

    /// <summary>Writes one table: the header row, then one row per record.</summary>
    internal static async Task WriteAsync(TextWriter writer, ExportTable table, CancellationToken cancellation = default)
    {
        var line = new StringBuilder();
        for (var c = 0; c < table.Columns.Count; c++)
        {
            AppendField(line, c, table.Columns[c].Name);
        }

        await writer.WriteLineAsync(line, cancellation).ConfigureAwait(false);
        for (var row = 0; row < table.Rows; row++)
        {
            line.Clear();
            for (var c = 0; c < table.Columns.Count; c++)
            {
                AppendField(line, c, Format(table.Columns[c], row));
            }

            await writer.WriteLineAsync(line, cancellation).ConfigureAwait(false);
        }
    }

    /// <summary>A field as RFC 4180 wants it: quoted (quotes doubled) when it holds a comma, a quote or a line break.</summary>
    internal static string Quote(string field) =>
        field.AsSpan().IndexOfAny(",\"\r\n") >= 0 ? $"\"{field.Replace("\"", "\"\"", StringComparison.Ordinal)}\"" : field;

    private static void AppendField(StringBuilder line, int column, string field)
    {
        if (column > 0)
        {
            line.Append(',');
        }

        line.Append(Quote(field));
    }

    private static string Format(ExportColumn column, int row) => column.Type switch
    {
        ExportColumnType.Double => ((double[])column.Values)[row].ToString("R", CultureInfo.InvariantCulture),
        ExportColumnType.Int32 => ((int[])column.Values)[row].ToString(CultureInfo.InvariantCulture),
        ExportColumnType.Boolean => ((bool[])column.Values)[row] ? "true" : "false",
        _ => ((string[])column.Values)[row],
    };
}
