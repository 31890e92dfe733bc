using System.Globalization;
using System.Text.Json;
using FiberWorkers.Atlas.Sweeps;

namespace FiberWorkers.Cli.Output;

/// <summary>Renderings of atlas summaries (shared by sweep and atlas).</summary>
internal static class AtlasOutput
{
    /// <summary>The summary keys: atlasVersion, tiles, samples, crossings, labels, kinds, flags, contentHash, atlasId.</summary>
    public static void WriteSummary(Utf8JsonWriter writer, SweepSummary summary)
    {
        writer.WriteStartObject();
        WriteSummaryFields(writer, summary);
        writer.WriteEndObject();
    }

    public static void WriteSummaryFields(Utf8JsonWriter writer, SweepSummary summary)
    {
        writer.WriteString("atlasId", summary.AtlasId);
        writer.WriteNumber("atlasVersion", summary.AtlasVersion);
        writer.WriteNumber("tiles", summary.Tiles);
        writer.WriteNumber("samples", summary.Samples);
        writer.WriteNumber("crossings", summary.Crossings);
        writer.WriteStartObject("labels");
        foreach (var (label, count) in summary.Labels)
        {
            writer.WriteNumber(label.ToString(CultureInfo.InvariantCulture), count);
        }

        writer.WriteEndObject();
        writer.WriteStartObject("kinds");
        foreach (var (kind, count) in summary.Kinds)
        {
            writer.WriteNumber(kind, count);
        }

        writer.WriteEndObject();
        writer.WriteNumber("flags", summary.Flags);
        writer.WriteString("contentHash", summary.ContentHash);
    }

    public static void WriteText(TextWriter output, SweepSummary summary)
    {
        output.WriteLine($"atlas       {summary.AtlasId}, version {summary.AtlasVersion}");
        output.WriteLine($"tiles       {summary.Tiles}");
        output.WriteLine($"samples     {summary.Samples} ({string.Join(", ", summary.Kinds.Select(k => $"{k.Value} {k.Key}"))})");
        output.WriteLine($"crossings   {summary.Crossings}");
        output.WriteLine($"labels      {string.Join(", ", summary.Labels.Select(l => $"{l.Value} samples with {l.Key} real"))}");
        if (summary.Flags > 0)
        {
            output.WriteLine($"flags       {summary.Flags} inconsistencies kept in the tiles (see 'fiber atlas --flags')");
        }

        output.WriteLine($"content     {summary.ContentHash}");
    }
}
