namespace FiberWorkers.Atlas.Stores;

/// <summary>One immutable version of an atlas.</summary>
/// <param name="Version">1, 2, … within the atlas.</param>
/// <param name="Parent">The version it was derived from, or null.</param>
/// <param name="Kind"><c>sweep</c>, <c>refine</c>, <c>model</c> or <c>learned</c>.</param>
/// <param name="Created">UTC creation time (never part of the content hash).</param>
/// <param name="Options">The canonical options text of the sweep that made it.</param>
/// <param name="ContentHash">Hash of the family, the options and every tile's content.</param>
/// <param name="Summary">The summary as JSON (tiles, samples, crossings, labels).</param>
public sealed record AtlasVersionInfo(int Version, int? Parent, string Kind, DateTimeOffset Created, string Options, string ContentHash, string Summary);

/// <summary>A tile as stored: its key, content hash and the encoded <c>TileResult</c>.</summary>
public sealed record StoredTile(string TileKey, string TileHash, byte[] Payload);
