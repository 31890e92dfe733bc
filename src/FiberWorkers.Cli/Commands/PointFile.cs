using System.Globalization;
using FiberWorkers.Algebra.Families;

namespace FiberWorkers.Cli.Commands;

/// <summary>
/// Reads a CSV of parameter points: a header naming the columns (every family parameter once; other columns are
/// ignored), then one point per row. A bad row is kept with its error so the batch can go on.
/// </summary>
internal static class PointFile
{
    /// <summary>Largest points file read. 64 MiB.</summary>
    private const long MaxBytes = 64L << 20;

    public sealed record Row(int Number, double[]? Point, string[] Raw, string? Error);

    public static List<Row> Read(string path, FamilyDefinition family)
    {
        var source = Path.GetFileName(path);
        string[] lines;
        try
        {
            var info = new FileInfo(path);
            if (!info.Exists)
            {
                throw new InputException(path, string.Empty, "no such file");
            }

            if (info.Length > MaxBytes)
            {
                throw new InputException(source, string.Empty, $"the file has {info.Length} bytes, above the limit of {MaxBytes}");
            }

            lines = File.ReadAllLines(path);
        }
        catch (Exception e) when (e is IOException or UnauthorizedAccessException)
        {
            throw new InputException(path, string.Empty, $"cannot read the file: {e.Message}");
        }

        var content = lines.Select((text, index) => (Text: text, Number: index + 1)).Where(l => l.Text.Trim().Length > 0).ToList();
        if (content.Count == 0)
        {
            throw new InputException(source, string.Empty, "the file is empty; expected a header with the parameter names");
        }

        var header = Split(content[0].Text).Select(h => h.Trim()).ToArray();
        var columns = new int[family.Parameters.Count];
        for (var k = 0; k < columns.Length; k++)
        {
            var name = family.Parameters[k].Name;
            columns[k] = Array.IndexOf(header, name);
            if (columns[k] < 0)
            {
                throw new InputException(
                    source,
                    $"line {content[0].Number} (header)",
                    $"no column '{name}'{NameSuggester.Hint(name, header)}; the header must name every parameter: {string.Join(", ", family.Parameters.Select(p => p.Name))}");
            }
        }

        var duplicate = header.GroupBy(h => h).FirstOrDefault(g => g.Count() > 1 && columns.Contains(Array.IndexOf(header, g.Key)));
        if (duplicate is not null)
        {
            throw new InputException(source, $"line {content[0].Number} (header)", $"the column '{duplicate.Key}' appears twice");
        }

        var rows = new List<Row>();
        foreach (var (text, number) in content.Skip(1))
        {
            var cells = Split(text);
            var point = new double[columns.Length];
            string? problem = null;
            for (var k = 0; k < columns.Length && problem is null; k++)
            {
                var name = family.Parameters[k].Name;
                if (columns[k] >= cells.Length)
                {
                    problem = $"line {number}: missing the column '{name}' ({cells.Length} cells, the header has {header.Length})";
                }
                else if (!double.TryParse(cells[columns[k]].Trim(), NumberStyles.Float, CultureInfo.InvariantCulture, out point[k]))
                {
                    problem = $"line {number}, column {name}: '{Shorten(cells[columns[k]].Trim())}' is not a number";
                }
                else if (!double.IsFinite(point[k]))
                {
                    problem = $"line {number}, column {name}: NaN or infinite values are not allowed";
                }
            }

            rows.Add(new Row(number, problem is null ? point : null, cells, problem));
        }

        return rows;
    }

    /// <summary>Splits one CSV line (RFC 4180 quoting).</summary>
    private static string[] Split(string line)
    {
        var cells = new List<string>();
        var cell = new System.Text.StringBuilder();
        var quoted = false;
        for (var i = 0; i < line.Length; i++)
        {
            var c = line[i];
            if (quoted)
            {
                if (c == '"' && i + 1 < line.Length && line[i + 1] == '"')
                {
                    cell.Append('"');
                    i++;
                }
                else if (c == '"')
                {
                    quoted = false;
                }
                else
                {
                    cell.Append(c);
                }
            }
            else if (c == '"')
            {
                quoted = true;
            }
            else if (c == ',')
            {
                cells.Add(cell.ToString());
                cell.Clear();
            }
            else
            {
                cell.Append(c);
            }
        }

        cells.Add(cell.ToString());
        return [.. cells];
    }

    private static string Shorten(string text) => text.Length <= 30 ? text : string.Concat(text.AsSpan(0, 27), "...");
}
