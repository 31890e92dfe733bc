namespace FiberWorkers.Atlas.Exports;

/// <summary>The files an export wrote.</summary>
/// <param name="AtlasId">The atlas exported.</param>
/// <param name="Version">The atlas version exported.</param>
/// <param name="Files">One entry per table, samples first.</param>
public sealed record ExportResult(string AtlasId, int Version, IReadOnlyList<ExportedFile> Files);

/// <summary>One written table.</summary>
/// <param name="Path">Full path of the file.</param>
/// <param name="Table"><c>samples</c> or <c>crossings</c>.</param>
/// <param name="Rows">Data rows written (without the CSV header).</param>
/// <param name="Columns">Column names in file order.</param>
public sealed record ExportedFile(string Path, string Table, long Rows, IReadOnlyList<string> Columns);
