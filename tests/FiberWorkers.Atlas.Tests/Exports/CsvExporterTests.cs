using System.Globalization;
using System.Text;
using FiberWorkers.Algebra.Families;
using FiberWorkers.Atlas.Exports;
using FiberWorkers.Atlas.Sweeps;
using FiberWorkers.Testing;

namespace FiberWorkers.Atlas.Tests.Exports;

public sealed class CsvExporterTests
{
    [Fact]
    public async Task Samples_csv_has_a_column_per_parameter_then_the_fixed_columns_and_a_row_per_sample()
    {
        var snapshot = SmallAtlases.Cubic;
        using var folder = SmallAtlases.Folder();

        var result = await CsvExporter.ExportAsync(snapshot, folder.Path);

        var table = ReadCsv(Path.Combine(folder.Path, "samples.csv"));
        Assert.Equal(["b", "c", "label", "kind", "tile", "version", "certified", "line", "s"], table.Header);
        Assert.Equal(snapshot.Samples.Count, table.Rows.Count);
        Assert.Equal(snapshot.Samples.Count, result.Files[0].Rows);
        for (var i = 0; i < table.Rows.Count; i++)
        {
            var (tile, sample) = snapshot.Samples[i];
            var row = table.Rows[i];
            // Round-trip doubles: the text parses back to the very same bits.
            Assert.Equal(sample.Point[0], double.Parse(row[0], CultureInfo.InvariantCulture));
            Assert.Equal(sample.Point[1], double.Parse(row[1], CultureInfo.InvariantCulture));
            Assert.Equal(sample.Label, int.Parse(row[2], CultureInfo.InvariantCulture));
            Assert.Equal(AtlasContent.KindName(sample.Kind), row[3]);
            Assert.Equal(tile, row[4]);
            Assert.Equal(snapshot.Version.Version.ToString(CultureInfo.InvariantCulture), row[5]);
            Assert.Equal(sample.Certified ? "true" : "false", row[6]);
            Assert.Equal(sample.Line, int.Parse(row[7], CultureInfo.InvariantCulture));
            Assert.Equal(sample.S, double.Parse(row[8], CultureInfo.InvariantCulture));
        }
    }

    [Fact]
    public async Task Samples_csv_labels_per_kind_equal_the_snapshot_counts()
    {
        var snapshot = SmallAtlases.Cubic;
        using var folder = SmallAtlases.Folder();

        await CsvExporter.ExportAsync(snapshot, folder.Path);

        var table = ReadCsv(Path.Combine(folder.Path, "samples.csv"));
        var exported = table.Rows.GroupBy(r => (Kind: r[3], Label: int.Parse(r[2], CultureInfo.InvariantCulture))).ToDictionary(g => g.Key, g => g.Count());
        var expected = snapshot.Samples.GroupBy(s => (Kind: AtlasContent.KindName(s.Sample.Kind), s.Sample.Label)).ToDictionary(g => g.Key, g => g.Count());
        Assert.Equal(expected.OrderBy(e => e.Key), exported.OrderBy(e => e.Key));
        // The depressed cubic has 1 or 3 real roots off its discriminant; all three sample kinds occur.
        Assert.Equal([1, 3], exported.Keys.Select(k => k.Label).Distinct().Order());
        Assert.Equal(["midpoint", "near-boundary", "uniform"], exported.Keys.Select(k => k.Kind).Distinct().Order(StringComparer.Ordinal));
    }

    [Fact]
    public async Task Crossings_csv_has_a_row_per_crossing_with_kind_tile_and_version()
    {
        var snapshot = SmallAtlases.Cubic;
        using var folder = SmallAtlases.Folder();

        await CsvExporter.ExportAsync(snapshot, folder.Path);

        var table = ReadCsv(Path.Combine(folder.Path, "crossings.csv"));
        Assert.Equal(["b", "c", "kind", "tile", "version", "s", "line"], table.Header);
        Assert.NotEmpty(snapshot.Crossings);
        Assert.Equal(snapshot.Crossings.Count, table.Rows.Count);
        for (var i = 0; i < table.Rows.Count; i++)
        {
            var (tile, crossing) = snapshot.Crossings[i];
            Assert.Equal(crossing.Point[0], double.Parse(table.Rows[i][0], CultureInfo.InvariantCulture));
            Assert.Equal(crossing.Point[1], double.Parse(table.Rows[i][1], CultureInfo.InvariantCulture));
            Assert.Equal(AtlasContent.KindName(crossing.Kind), table.Rows[i][2]);
            Assert.Equal(tile, table.Rows[i][3]);
            Assert.Equal(crossing.S, double.Parse(table.Rows[i][5], CultureInfo.InvariantCulture));
        }
    }

    [Fact]
    public async Task Csv_follows_rfc_4180_crlf_lines_quoted_tile_keys_and_no_byte_order_mark()
    {
        var snapshot = SmallAtlases.Cubic;
        using var folder = SmallAtlases.Folder();

        await CsvExporter.ExportAsync(snapshot, folder.Path);

        var bytes = await File.ReadAllBytesAsync(Path.Combine(folder.Path, "samples.csv"));
        Assert.NotEqual(0xEF, bytes[0]);
        var text = Encoding.UTF8.GetString(bytes);
        Assert.StartsWith("b,c,label,kind,tile,version,certified,line,s\r\n", text, StringComparison.Ordinal);
        Assert.EndsWith("\r\n", text, StringComparison.Ordinal);
        Assert.DoesNotContain("\n", text.Replace("\r\n", string.Empty, StringComparison.Ordinal), StringComparison.Ordinal);
        // Tile keys hold a comma ("L0:1,2"), so they are quoted.
        Assert.Contains($",\"{snapshot.Samples[0].Tile}\",", text, StringComparison.Ordinal);
        Assert.Equal("plain", CsvExporter.Quote("plain"));
        Assert.Equal("\"a,b\"", CsvExporter.Quote("a,b"));
        Assert.Equal("\"say \"\"hi\"\"\"", CsvExporter.Quote("say \"hi\""));
        Assert.Equal("\"two\r\nlines\"", CsvExporter.Quote("two\r\nlines"));
    }

    [Fact]
    public void A_parameter_named_like_a_fixed_column_is_prefixed_so_names_stay_unique()
    {
        // x² − kind − s: parameters called like the fixed columns "kind" and "s".
        var family = TestFamilies.Build("clash", ["x"], ["x^2 - kind - s"], [("kind", -1, 1), ("s", -1, 1)]);
        var snapshot = SmallAtlases.Sweep(family, [1, 1], 1);

        var samples = ExportTable.Samples(snapshot);
        var crossings = ExportTable.Crossings(snapshot);

        Assert.Equal(["parameter_kind", "parameter_s", "label", "kind", "tile", "version", "certified", "line", "s"], samples.Columns.Select(c => c.Name));
        Assert.Equal(["parameter_kind", "parameter_s", "kind", "tile", "version", "s", "line"], crossings.Columns.Select(c => c.Name));
    }

    [Fact]
    public async Task An_out_path_under_a_file_is_an_input_error_naming_the_path()
    {
        using var folder = SmallAtlases.Folder();
        var file = Path.Combine(folder.Path, "plain.txt");
        await File.WriteAllTextAsync(file, "not a directory");

        var error = await Assert.ThrowsAsync<InputException>(() => CsvExporter.ExportAsync(SmallAtlases.Cubic, Path.Combine(file, "out")));
        Assert.Contains(Path.Combine(file, "out"), error.Message, StringComparison.Ordinal);
        Assert.Contains("cannot create the output directory", error.Message, StringComparison.Ordinal);

        var onFile = await Assert.ThrowsAsync<InputException>(() => CsvExporter.ExportAsync(SmallAtlases.Cubic, file));
        Assert.Contains("is a file", onFile.Message, StringComparison.Ordinal);
    }

    /// <summary>A strict RFC 4180 reader of our own (quoted fields, doubled quotes, CRLF records).</summary>
    internal static (IReadOnlyList<string> Header, IReadOnlyList<string[]> Rows) ReadCsv(string path)
    {
        var text = File.ReadAllText(path, Encoding.UTF8);
        var records = new List<string[]>();
        var fields = new List<string>();
        var field = new StringBuilder();
        var quoted = false;
        for (var i = 0; i < text.Length; i++)
        {
            var ch = text[i];
            if (quoted)
            {
                if (ch == '"' && i + 1 < text.Length && text[i + 1] == '"')
                {
                    field.Append('"');
                    i++;
                }
                else if (ch == '"')
                {
                    quoted = false;
                }
                else
                {
                    field.Append(ch);
                }
            }
            else if (ch == '"')
            {
                quoted = true;
            }
            else if (ch == ',')
            {
                fields.Add(field.ToString());
                field.Clear();
            }
            else if (ch == '\r' && i + 1 < text.Length && text[i + 1] == '\n')
            {
                fields.Add(field.ToString());
                field.Clear();
                records.Add([.. fields]);
                fields.Clear();
                i++;
            }
            else
            {
                Assert.NotEqual('\n', ch);
                field.Append(ch);
            }
        }

        Assert.False(quoted, "unterminated quoted field");
        Assert.Empty(fields);
        Assert.All(records, r => Assert.Equal(records[0].Length, r.Length));
        return (records[0], records.Skip(1).ToList());
    }
}
