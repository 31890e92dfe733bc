using System.Globalization;
using System.Security.Cryptography;
using System.Text;
using System.Text.Json;
using FiberWorkers.Contracts.V1;

namespace FiberWorkers.Atlas.Sweeps;

/// <summary>Content hashes and summaries of atlas versions, computed from tiles only (never from timestamps).</summary>
public static class AtlasContent
{
    /// <summary>
    /// SHA-256 (hex) over the family hash, the options text and every (tile key, tile hash) in key order: two
    /// versions with the same family, options and tile contents hash alike whoever computed them.
    /// </summary>
    public static string Hash(string familyHash, string optionsText, IReadOnlyDictionary<string, string> tiles)
    {
        var text = new StringBuilder("fiberworkers-atlas-v1\n").Append(familyHash).Append('\n').Append(optionsText).Append('\n');
        foreach (var key in tiles.Keys.Order(StringComparer.Ordinal))
        {
            text.Append(key).Append(' ').Append(tiles[key]).Append('\n');
        }

        return Convert.ToHexStringLower(SHA256.HashData(Encoding.UTF8.GetBytes(text.ToString())));
    }

    /// <summary>Counts over a version's tiles.</summary>
    public static (long Samples, long Crossings, SortedDictionary<int, long> Labels, SortedDictionary<string, long> Kinds, int Flags) Count(IEnumerable<TileResult> tiles)
    {
        long samples = 0;
        long crossings = 0;
        var flags = 0;
        var labels = new SortedDictionary<int, long>();
        var kinds = new SortedDictionary<string, long>(StringComparer.Ordinal);
        foreach (var tile in tiles)
        {
            samples += tile.Samples.Count;
            crossings += tile.Crossings.Count;
            flags += tile.Flags.Count;
            foreach (var sample in tile.Samples)
            {
                labels[sample.Label] = labels.GetValueOrDefault(sample.Label) + 1;
                var kind = KindName(sample.Kind);
                kinds[kind] = kinds.GetValueOrDefault(kind) + 1;
            }
        }

        return (samples, crossings, labels, kinds, flags);
    }

    /// <summary>The summary JSON stored with a version (same keys as the sweep's --json summary).</summary>
    public static string SummaryJson(int tiles, long samples, long crossings, IReadOnlyDictionary<int, long> labels, IReadOnlyDictionary<string, long> kinds, int flags)
    {
        using var buffer = new MemoryStream();
        using (var writer = new Utf8JsonWriter(buffer))
        {
            writer.WriteStartObject();
            writer.WriteNumber("tiles", tiles);
            writer.WriteNumber("samples", samples);
            writer.WriteNumber("crossings", crossings);
            writer.WriteStartObject("labels");
            foreach (var (label, count) in labels)
            {
                writer.WriteNumber(label.ToString(CultureInfo.InvariantCulture), count);
            }

            writer.WriteEndObject();
            writer.WriteStartObject("kinds");
            foreach (var (kind, count) in kinds)
            {
                writer.WriteNumber(kind, count);
            }

            writer.WriteEndObject();
            writer.WriteNumber("flags", flags);
            writer.WriteEndObject();
        }

        return Encoding.UTF8.GetString(buffer.ToArray());
    }

    /// <summary><c>uniform</c>, <c>midpoint</c> or <c>near-boundary</c>.</summary>
    public static string KindName(SampleKind kind) => kind switch
    {
        SampleKind.Uniform => "uniform",
        SampleKind.Midpoint => "midpoint",
        SampleKind.NearBoundary => "near-boundary",
        SampleKind.Resolved => "resolved",
        _ => "unspecified",
    };

    /// <summary><c>fold</c>, <c>fold-at-infinity</c> or <c>passage</c>.</summary>
    public static string KindName(CrossingKind kind) => kind switch
    {
        CrossingKind.Fold => "fold",
        CrossingKind.FoldAtInfinity => "fold-at-infinity",
        CrossingKind.Passage => "passage",
        _ => "unspecified",
    };
}
