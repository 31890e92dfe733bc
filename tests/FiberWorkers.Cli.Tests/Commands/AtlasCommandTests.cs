using System.Globalization;
using System.Text.Json;
using FiberWorkers.Atlas.Stores;
using FiberWorkers.Atlas.Sweeps;
using FiberWorkers.Contracts.V1;
using FiberWorkers.Testing;
using Google.Protobuf;

namespace FiberWorkers.Cli.Tests.Commands;

public sealed class AtlasCommandTests
{
    private static readonly string[] SummaryKeys = ["atlasId", "atlasVersion", "tiles", "samples", "crossings", "labels", "kinds", "flags", "contentHash"];

    [Fact]
    public async Task Atlas_json_lists_every_version_with_the_same_summary_as_the_sweep_printed()
    {
        var atlas = await AtlasFiles.CubicAsync();

        var (code, output, error) = await CliRunner.RunAsync("atlas", atlas.Path, "--json");

        Assert.Equal(0, code);
        Assert.Equal(string.Empty, error);
        var root = JsonDocument.Parse(output).RootElement;
        Assert.Equal("depressed cubic", root.GetProperty("family").GetString());
        Assert.Equal(["b", "c"], root.GetProperty("parameters").EnumerateArray().Select(p => p.GetProperty("name").GetString()));
        var versions = root.GetProperty("versions").EnumerateArray().ToArray();
        Assert.Equal(2, versions.Length);
        for (var i = 0; i < versions.Length; i++)
        {
            Assert.Equal(i + 1, versions[i].GetProperty("version").GetInt32());
            Assert.Equal("sweep", versions[i].GetProperty("kind").GetString());
            var created = versions[i].GetProperty("created").GetString()!;
            Assert.EndsWith("Z", created, StringComparison.Ordinal);
            Assert.True(DateTimeOffset.TryParse(created, CultureInfo.InvariantCulture, DateTimeStyles.AssumeUniversal, out _), created);
            foreach (var key in SummaryKeys)
            {
                Assert.True(JsonElement.DeepEquals(atlas.Summaries[i].GetProperty(key), versions[i].GetProperty(key)), $"version {i + 1}, key {key}");
            }
        }

        Assert.Equal(JsonValueKind.Null, versions[0].GetProperty("parent").ValueKind);
        Assert.Equal(1, versions[1].GetProperty("parent").GetInt32());
        Assert.False(root.TryGetProperty("flagged", out _));
    }

    [Fact]
    public async Task Atlas_text_lists_versions_with_parent_kind_creation_and_summary()
    {
        var atlas = await AtlasFiles.CubicAsync();

        var (code, output, _) = await CliRunner.RunAsync("atlas", atlas.Path);

        Assert.Equal(0, code);
        Assert.Contains("family      depressed cubic: b in [-3, 1], c in [-2, 2]; unknowns x", output, StringComparison.Ordinal);
        Assert.Contains("version 1   sweep, no parent, created ", output, StringComparison.Ordinal);
        Assert.Contains("version 2   sweep, parent 1, created ", output, StringComparison.Ordinal);
        Assert.Contains($"  content     {atlas.Summaries[1].GetProperty("contentHash").GetString()}", output, StringComparison.Ordinal);
        Assert.Contains($"  samples     {atlas.Summaries[0].GetProperty("samples").GetInt64()} (", output, StringComparison.Ordinal);
    }

    [Fact]
    public async Task Flags_lists_the_kept_flags_of_the_latest_version_with_their_tiles()
    {
        var path = Path.Combine(AtlasFiles.Folder(), "flagged.db");
        CommitFlaggedVersion(path);

        var (code, output, _) = await CliRunner.RunAsync("atlas", path, "--flags");
        var (jsonCode, json, _) = await CliRunner.RunAsync("atlas", path, "--flags", "--json");

        Assert.Equal(0, code);
        Assert.Contains("flags       2 kept in version 1:", output, StringComparison.Ordinal);
        Assert.Contains("  L0:1,0  line 0: the real count changes by an odd number (1 to 2) across the fold at s = 0.25", output, StringComparison.Ordinal);
        Assert.Contains("  L0:1,0  line 1: at s = 0.5 real-only tracking failed", output, StringComparison.Ordinal);
        Assert.Equal(0, jsonCode);
        var flagged = JsonDocument.Parse(json).RootElement.GetProperty("flagged");
        Assert.Equal(1, flagged.GetProperty("version").GetInt32());
        Assert.Equal(["L0:1,0", "L0:1,0"], flagged.GetProperty("flags").EnumerateArray().Select(f => f.GetProperty("tile").GetString()));
        Assert.Equal(2, JsonDocument.Parse(json).RootElement.GetProperty("versions")[0].GetProperty("flags").GetInt32());
    }

    [Fact]
    public async Task Flags_says_none_when_none_are_kept()
    {
        var atlas = await AtlasFiles.CubicAsync();

        var (code, output, _) = await CliRunner.RunAsync("atlas", atlas.Path, "--flags");

        Assert.Equal(0, code);
        Assert.Contains("flags       none kept in version 2", output, StringComparison.Ordinal);
    }

    [Fact]
    public async Task A_file_with_two_atlases_needs_atlas_id_and_names_them()
    {
        var path = Path.Combine(AtlasFiles.Folder(), "two.db");
        foreach (var example in new[] { "cubic", "reaction-switch" })
        {
            var (sweep, _, sweepError) = await CliRunner.RunAsync("sweep", "--example", example, "--atlas", path, "--tiles", "2x2", "--lines", "1");
            Assert.True(sweep == 0, sweepError);
        }

        IReadOnlyList<string> ids;
        using (var store = SqliteAtlasStore.Open(path, create: false))
        {
            ids = store.Atlases();
        }

        var (code, _, error) = await CliRunner.RunAsync("atlas", path);
        Assert.Equal(1, code);
        Assert.Equal($"two.db: the file holds 2 atlases ({string.Join(", ", ids)}); name one with --atlas-id", error.Trim());

        var (chosen, output, _) = await CliRunner.RunAsync("atlas", path, "--atlas-id", ids[1]);
        Assert.Equal(0, chosen);
        Assert.Contains($"atlas       {ids[1]} in two.db", output, StringComparison.Ordinal);

        var (unknown, _, unknownError) = await CliRunner.RunAsync("atlas", path, "--atlas-id", "a000");
        Assert.Equal(1, unknown);
        Assert.Contains("two.db: --atlas-id: no atlas 'a000' in the file", unknownError, StringComparison.Ordinal);
    }

    [Fact]
    public async Task A_missing_file_a_directory_and_a_file_that_is_not_an_atlas_are_input_errors()
    {
        var folder = AtlasFiles.Folder();
        var text = Path.Combine(folder, "notes.txt");
        await File.WriteAllTextAsync(text, "these are not the tiles you are looking for\n");

        var missing = await CliRunner.RunAsync("atlas", Path.Combine(folder, "absent.db"));
        var directory = await CliRunner.RunAsync("atlas", folder);
        var notAtlas = await CliRunner.RunAsync("atlas", text);

        Assert.Equal(1, missing.ExitCode);
        Assert.Equal($"{Path.Combine(folder, "absent.db")}: no such atlas file", missing.Error.Trim());
        Assert.Equal(1, directory.ExitCode);
        Assert.Equal($"{folder}: is a directory, not an atlas file", directory.Error.Trim());
        Assert.Equal(1, notAtlas.ExitCode);
        Assert.StartsWith("notes.txt: not an atlas file", notAtlas.Error, StringComparison.Ordinal);
        Assert.All(new[] { missing.Error, directory.Error, notAtlas.Error }, e => Assert.DoesNotContain("   at ", e, StringComparison.Ordinal));
    }

    /// <summary>
    /// Commits, through the store, a cubic atlas version of one tile carrying two flags of the kinds the sampler
    /// keeps: no sweep produces an inconsistency on demand.
    /// </summary>
    private static void CommitFlaggedVersion(string path)
    {
        var family = TestFamilies.Example("cubic");
        using var store = SqliteAtlasStore.Open(path);
        var atlasId = SweepRunner.AtlasIdOf(family);
        store.EnsureAtlas(atlasId, family.ContentHash, JsonFormatter.Default.Format(family.Message));
        var tile = new TileResult { FamilyHash = family.ContentHash, TileKey = "L0:1,0" };
        tile.Low.Add([-1.0, -2.0]);
        tile.High.Add([1.0, 0.0]);
        tile.Samples.Add(new Sample { Point = { -0.5, -1.0 }, Label = 1, Kind = SampleKind.Uniform, Certified = true });
        tile.Flags.Add("line 0: the real count changes by an odd number (1 to 2) across the fold at s = 0.25");
        tile.Flags.Add("line 1: at s = 0.5 real-only tracking failed; a full solve finds 3 real solutions, not 1");
        var payload = tile.ToByteArray();
        var hash = SqliteAtlasStore.HashOf(payload);
        var (sweepId, _) = store.BeginOrResumeSweep(atlasId, "test-flags", null);
        store.PutTile(sweepId, tile.TileKey, hash, payload);
        store.CommitSweep(sweepId, "sweep", tiles =>
        {
            var (samples, crossings, labels, kinds, flags) = AtlasContent.Count([tile]);
            return (AtlasContent.Hash(family.ContentHash, "test-flags", tiles), AtlasContent.SummaryJson(tiles.Count, samples, crossings, labels, kinds, flags));
        });
    }
}
