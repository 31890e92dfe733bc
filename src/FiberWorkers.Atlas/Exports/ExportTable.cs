using FiberWorkers.Algebra.Families;
using FiberWorkers.Atlas.Stores;
using FiberWorkers.Atlas.Sweeps;
using Google.Protobuf.Collections;

namespace FiberWorkers.Atlas.Exports;

/// <summary>The type of an export column.</summary>
internal enum ExportColumnType
{
    Double,
    Int32,
    Boolean,
    String,
}

/// <summary>One column of an export table: its name, type and values (an array of the matching CLR type).</summary>
internal sealed record ExportColumn(string Name, ExportColumnType Type, Array Values);

/// <summary>
/// One exported table (samples or crossings) in columns, the single description of the export schema that the CSV
/// and Parquet writers both follow: one column per parameter named after it, then the fixed columns.
/// </summary>
internal sealed class ExportTable
{
    /// <summary>The fixed columns of the samples table, after the parameter columns.</summary>
    public static readonly IReadOnlyList<string> SampleColumns = ["label", "kind", "tile", "version", "certified", "line", "s"];

    /// <summary>The fixed columns of the crossings table, after the parameter columns.</summary>
    public static readonly IReadOnlyList<string> CrossingColumns = ["kind", "tile", "version", "s", "line"];

    private ExportTable(string name, int rows, IReadOnlyList<ExportColumn> columns)
    {
        Name = name;
        Rows = rows;
        Columns = columns;
    }

    /// <summary><c>samples</c> or <c>crossings</c>: the file name without extension.</summary>
    public string Name { get; }

    public int Rows { get; }

    public IReadOnlyList<ExportColumn> Columns { get; }

    /// <summary>The samples of a snapshot: parameters, label, kind, tile, version, certified, line, s.</summary>
    public static ExportTable Samples(AtlasSnapshot snapshot)
    {
        ArgumentNullException.ThrowIfNull(snapshot);
        var rows = snapshot.Samples;
        var names = ParameterColumnNames(snapshot, SampleColumns);
        var columns = new List<ExportColumn>();
        for (var k = 0; k < names.Count; k++)
        {
            var values = new double[rows.Count];
            for (var i = 0; i < rows.Count; i++)
            {
                values[i] = Coordinate(rows[i].Sample.Point, k, rows[i].Tile, "a sample", snapshot);
            }

            columns.Add(new ExportColumn(names[k], ExportColumnType.Double, values));
        }

        var version = snapshot.Version.Version;
        columns.Add(Column("label", ExportColumnType.Int32, rows, r => r.Sample.Label));
        columns.Add(Column("kind", ExportColumnType.String, rows, r => AtlasContent.KindName(r.Sample.Kind)));
        columns.Add(Column("tile", ExportColumnType.String, rows, r => r.Tile));
        columns.Add(Column("version", ExportColumnType.Int32, rows, _ => version));
        columns.Add(Column("certified", ExportColumnType.Boolean, rows, r => r.Sample.Certified));
        columns.Add(Column("line", ExportColumnType.Int32, rows, r => r.Sample.Line));
        columns.Add(Column("s", ExportColumnType.Double, rows, r => r.Sample.S));
        return new ExportTable("samples", rows.Count, columns);
    }

    /// <summary>The crossings of a snapshot: parameters, kind, tile, version, s, line.</summary>
    public static ExportTable Crossings(AtlasSnapshot snapshot)
    {
        ArgumentNullException.ThrowIfNull(snapshot);
        var rows = snapshot.Crossings;
        var names = ParameterColumnNames(snapshot, CrossingColumns);
        var columns = new List<ExportColumn>();
        for (var k = 0; k < names.Count; k++)
        {
            var values = new double[rows.Count];
            for (var i = 0; i < rows.Count; i++)
            {
                values[i] = Coordinate(rows[i].Crossing.Point, k, rows[i].Tile, "a crossing", snapshot);
            }

            columns.Add(new ExportColumn(names[k], ExportColumnType.Double, values));
        }

        var version = snapshot.Version.Version;
        columns.Add(Column("kind", ExportColumnType.String, rows, r => AtlasContent.KindName(r.Crossing.Kind)));
        columns.Add(Column("tile", ExportColumnType.String, rows, r => r.Tile));
        columns.Add(Column("version", ExportColumnType.Int32, rows, _ => version));
        columns.Add(Column("s", ExportColumnType.Double, rows, r => r.Crossing.S));
        columns.Add(Column("line", ExportColumnType.Int32, rows, r => r.Crossing.Line));
        return new ExportTable("crossings", rows.Count, columns);
    }

    /// <summary>
    /// The parameter names as column names. A parameter named like a fixed column (a parameter called <c>kind</c>)
    /// gets the prefix <c>parameter_</c>, so that every column name stays unique (Parquet requires it).
    /// </summary>
    internal static IReadOnlyList<string> ParameterColumnNames(AtlasSnapshot snapshot, IReadOnlyList<string> fixedColumns)
    {
        var taken = new HashSet<string>(fixedColumns, StringComparer.Ordinal);
        foreach (var parameter in snapshot.Family.Parameters)
        {
            taken.Add(parameter.Name);
        }

        var names = new List<string>();
        foreach (var parameter in snapshot.Family.Parameters)
        {
            var name = parameter.Name;
            if (fixedColumns.Contains(name, StringComparer.Ordinal))
            {
                name = $"parameter_{name}";
                while (taken.Contains(name))
                {
                    name = $"parameter_{name}";
                }

                taken.Add(name);
            }

            names.Add(name);
        }

        return names;
    }

    private static ExportColumn Column<TRow, TValue>(string name, ExportColumnType type, IReadOnlyList<TRow> rows, Func<TRow, TValue> value)
    {
        var values = new TValue[rows.Count];
        for (var i = 0; i < rows.Count; i++)
        {
            values[i] = value(rows[i]);
        }

        return new ExportColumn(name, type, values);
    }

    private static double Coordinate(RepeatedField<double> point, int axis, string tile, string what, AtlasSnapshot snapshot) =>
        axis < point.Count
            ? point[axis]
            : throw new InputException(
                $"atlas {snapshot.AtlasId}", $"tile {tile}", $"{what} has {point.Count} coordinates; the family has {snapshot.Family.Parameters.Count} parameters (the file is damaged)");
}
