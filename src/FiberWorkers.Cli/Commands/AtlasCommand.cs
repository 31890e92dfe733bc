using System.CommandLine;
using System.Globalization;
using System.Text.Json;
using FiberWorkers.Algebra.Families;
using FiberWorkers.Atlas.Stores;
using FiberWorkers.Atlas.Sweeps;
using FiberWorkers.Cli.Output;

namespace FiberWorkers.Cli.Commands;

/// <summary>
/// <c>fiber atlas FILE [--json] [--flags] [--atlas-id ID]</c>: the versions of an atlas (number, parent, kind,
/// creation time in UTC) with the same summary per version as <c>fiber sweep</c> prints, and on request the
/// inconsistency flags kept in the latest version. With <c>--coordinator URL</c>: the versions a cluster holds.
/// </summary>
internal static class AtlasCommand
{
    public static Command Create(TextWriter output)
    {
        var atlas = new AtlasArguments(fileOptional: true);
        var coordinator = new Option<string?>("--coordinator") { Description = "List the atlases a cluster's coordinator holds instead of a file's." };
        var json = new Option<bool>("--json") { Description = "Print one JSON object instead of text." };
        var flags = new Option<bool>("--flags") { Description = "Also list the inconsistency flags kept in the latest version, with their tiles." };
        var command = new Command("atlas", "List the versions of an atlas file with their summaries.");
        atlas.AddTo(command);
        command.Options.Add(json);
        command.Options.Add(flags);
        command.Options.Add(coordinator);
        var security = new ClientSecurityArguments();
        foreach (var option in security.Options)
        {
            command.Options.Add(option);
        }

        command.SetAction(async (parse, cancellation) =>
        {
            if (parse.GetValue(coordinator) is { } remote)
            {
                if (parse.GetValue(atlas.File) is not null || parse.GetValue(flags))
                {
                    throw new UsageException("with --coordinator, give no FILE (and --flags reads files only); --atlas-id picks one atlas");
                }

                var url = ServeCommand.Url(remote, "--coordinator");
                await WriteRemote(output, url, security.Resolve(parse, url, "--coordinator"), parse.GetValue(atlas.AtlasId), parse.GetValue(json), cancellation).ConfigureAwait(false);
                return CommandLine.Success;
            }

            if (parse.GetValue(atlas.File) is null)
            {
                throw new UsageException("give the atlas FILE (or --coordinator URL)");
            }

            using var store = atlas.Open(parse);
            var latest = atlas.Load(parse, store);
            var runner = new SweepRunner(store);
            var versions = store.Versions(latest.AtlasId);
            var summaries = versions.Select(v => (Info: v, Summary: runner.Summarize(latest.AtlasId, v.Version))).ToArray();
            var kept = parse.GetValue(flags)
                ? latest.Tiles.SelectMany(t => t.Flags.Select(f => (Tile: t.TileKey, Flag: f))).ToArray()
                : null;
            if (parse.GetValue(json))
            {
                JsonOutput.Write(output, writer => WriteJson(writer, parse.GetValue(atlas.File)!, latest, summaries, kept));
            }
            else
            {
                WriteText(output, parse.GetValue(atlas.File)!, latest, summaries, kept);
            }

            return CommandLine.Success;
        });
        return command;
    }

    private static async Task WriteRemote(TextWriter output, Uri coordinator, FiberWorkers.Cluster.Security.ClientSecurity security, string? atlasId, bool json, CancellationToken cancellation)
    {
        using var client = new FiberWorkers.Cluster.Client.ClusterClient(coordinator, security: security);
        var versions = await client.VersionsAsync(atlasId ?? string.Empty, cancellation).ConfigureAwait(false);
        if (json)
        {
            JsonOutput.Write(output, writer =>
            {
                writer.WriteStartObject();
                writer.WriteString("coordinator", coordinator.ToString().TrimEnd('/'));
                writer.WriteStartArray("versions");
                foreach (var version in versions)
                {
                    writer.WriteStartObject();
                    writer.WriteString("atlasId", version.AtlasId);
                    writer.WriteString("family", version.FamilyName);
                    writer.WriteNumber("version", version.Version);
                    if (version.Parent > 0)
                    {
                        writer.WriteNumber("parent", version.Parent);
                    }
                    else
                    {
                        writer.WriteNull("parent");
                    }

                    writer.WriteString("kind", version.Kind);
                    writer.WriteString("created", version.Created);
                    writer.WriteString("options", version.Options);
                    writer.WriteString("contentHash", version.ContentHash);
                    writer.WritePropertyName("summary");
                    using (var summary = JsonDocument.Parse(version.SummaryJson))
                    {
                        summary.RootElement.WriteTo(writer);
                    }

                    writer.WriteEndObject();
                }

                writer.WriteEndArray();
                writer.WriteEndObject();
            });
            return;
        }

        if (versions.Count == 0)
        {
            output.WriteLine($"the coordinator at {coordinator} holds no atlas version yet");
            return;
        }

        foreach (var group in versions.GroupBy(v => v.AtlasId))
        {
            output.WriteLine($"atlas {group.Key} ({group.First().FamilyName})");
            foreach (var version in group)
            {
                output.WriteLine($"  version {version.Version,3}  {version.Kind,-8} {version.Created}  {version.ContentHash[..16]}  {version.SummaryJson}");
            }
        }
    }

    private static void WriteJson(
        Utf8JsonWriter writer, string file, AtlasSnapshot latest, (AtlasVersionInfo Info, SweepSummary Summary)[] versions, (string Tile, string Flag)[]? flags)
    {
        writer.WriteStartObject();
        writer.WriteString("file", Path.GetFileName(file));
        writer.WriteString("atlasId", latest.AtlasId);
        writer.WriteString("family", latest.Family.Name);
        writer.WriteStartArray("parameters");
        foreach (var parameter in latest.Family.Parameters)
        {
            writer.WriteStartObject();
            writer.WriteString("name", parameter.Name);
            writer.WriteNumber("low", parameter.Low);
            writer.WriteNumber("high", parameter.High);
            writer.WriteEndObject();
        }

        writer.WriteEndArray();
        writer.WriteStartArray("unknowns");
        foreach (var unknown in latest.Family.Unknowns)
        {
            writer.WriteStringValue(unknown);
        }

        writer.WriteEndArray();
        writer.WriteNumber("latestVersion", latest.Version.Version);
        writer.WriteStartArray("versions");
        foreach (var (info, summary) in versions)
        {
            writer.WriteStartObject();
            writer.WriteNumber("version", info.Version);
            if (info.Parent is { } parent)
            {
                writer.WriteNumber("parent", parent);
            }
            else
            {
                writer.WriteNull("parent");
            }

            writer.WriteString("kind", info.Kind);
            writer.WriteString("created", Utc(info.Created));
            writer.WriteString("options", info.Options);
            AtlasOutput.WriteSummaryFields(writer, summary);
            writer.WriteEndObject();
        }

        writer.WriteEndArray();
        if (flags is not null)
        {
            writer.WriteStartObject("flagged");
            writer.WriteNumber("version", latest.Version.Version);
            writer.WriteStartArray("flags");
            foreach (var (tile, flag) in flags)
            {
                writer.WriteStartObject();
                writer.WriteString("tile", tile);
                writer.WriteString("flag", flag);
                writer.WriteEndObject();
            }

            writer.WriteEndArray();
            writer.WriteEndObject();
        }

        writer.WriteEndObject();
    }

    private static void WriteText(
        TextWriter output, string file, AtlasSnapshot latest, (AtlasVersionInfo Info, SweepSummary Summary)[] versions, (string Tile, string Flag)[]? flags)
    {
        var family = latest.Family;
        output.WriteLine($"atlas       {latest.AtlasId} in {Path.GetFileName(file)}");
        output.WriteLine($"family      {family.Name}: {string.Join(", ", family.Parameters.Select(p => string.Create(CultureInfo.InvariantCulture, $"{p.Name} in [{p.Low:R}, {p.High:R}]")))}; unknowns {string.Join(", ", family.Unknowns)}");
        output.WriteLine($"versions    {versions.Length} (latest {latest.Version.Version})");
        foreach (var (info, summary) in versions)
        {
            output.WriteLine();
            output.WriteLine($"version {info.Version}   {info.Kind}, {(info.Parent is { } parent ? $"parent {parent}" : "no parent")}, created {Utc(info.Created)}");
            output.WriteLine($"  tiles       {summary.Tiles}");
            output.WriteLine($"  samples     {summary.Samples} ({string.Join(", ", summary.Kinds.Select(k => $"{k.Value} {k.Key}"))})");
            output.WriteLine($"  crossings   {summary.Crossings}");
            output.WriteLine($"  labels      {string.Join(", ", summary.Labels.Select(l => $"{l.Value} with {l.Key} real"))}");
            output.WriteLine($"  flags       {summary.Flags}");
            output.WriteLine($"  options     {info.Options}");
            output.WriteLine($"  content     {summary.ContentHash}");
        }

        if (flags is not null)
        {
            output.WriteLine();
            output.WriteLine(flags.Length == 0
                ? $"flags       none kept in version {latest.Version.Version}"
                : $"flags       {flags.Length} kept in version {latest.Version.Version}:");
            foreach (var (tile, flag) in flags)
            {
                output.WriteLine($"  {tile}  {flag}");
            }
        }
    }

    /// <summary>ISO 8601 in UTC with a Z, to the second.</summary>
    private static string Utc(DateTimeOffset time) => time.UtcDateTime.ToString("yyyy-MM-dd'T'HH:mm:ss'Z'", CultureInfo.InvariantCulture);
}
