using System.Security.Cryptography;
using System.Text;
using FiberWorkers.Algebra.Families;
using FiberWorkers.Atlas.Stores;
using FiberWorkers.Atlas.Sweeps;
using FiberWorkers.Atlas.Tests.Support;
using FiberWorkers.Testing;
using Google.Protobuf;

namespace FiberWorkers.Atlas.Tests.Stores;

/// <summary>
/// Truncated and bit-flipped copies of a real atlas file: every read through the store either gives exactly the
/// answer of the intact file or fails with an <see cref="InputException"/> naming the file — never another exception,
/// never a different answer.
/// </summary>
public sealed class DamagedAtlasFileTests
{
    private static readonly Lazy<ReferenceAtlas> Reference = new(ReferenceAtlas.Build);

    [Fact]
    public void The_reference_file_is_read_back_whole_and_every_table_holds_rows()
    {
        // The judge below is only as good as the reference: it must cover every table the store reads.
        var reference = Reference.Value;
        using var copy = new TempAtlas("intact");
        File.WriteAllBytes(copy.Path, reference.Bytes);

        var read = ReferenceAtlas.Read(copy.Path, reference);
        Assert.Equal(reference.Intact.Answer, read.Answer);
        Assert.Equal(reference.BlobKeys.Length, read.Blobs.Count);
        foreach (var table in new[] { "atlases", "tiles", "sweeps", "sweep_tiles", "versions", "version_tiles", "blobs", "sweep_requests", "tile_attempts" })
        {
            Assert.True(RawSqlite.Scalar(copy.Path, $"SELECT COUNT(*) FROM {table}", readOnly: true) > 0, $"the reference atlas has no rows in {table}");
        }

        Assert.True(reference.Bytes.Length > 16 * 4096, $"the reference atlas is only {reference.Bytes.Length} bytes");
    }

    [Fact]
    public void Truncated_copies_are_refused_as_damaged()
    {
        var reference = Reference.Value;
        var length = reference.Bytes.Length;
        var page = 4096;
        int[] lengths = [1, 50, 99, 100, 512, page, page + 1, 2 * page, length / 3, length / 2, length - page, length - page + 17, length - 1];

        var failures = new List<string>();
        foreach (var keep in lengths.Distinct().Where(l => l > 0 && l < length))
        {
            failures.AddRange(Judge(reference, reference.Bytes[..keep], $"truncated to {keep} bytes", mustRefuse: true));
        }

        Assert.True(failures.Count == 0, string.Join(Environment.NewLine, failures));
    }

    [Fact]
    public void A_truncated_copy_of_zero_bytes_opens_as_an_empty_atlas_and_says_so()
    {
        // SQLite takes an empty file for a new database: the store sees no atlas, and loading one says the file is empty.
        using var copy = new TempAtlas("empty");
        File.WriteAllBytes(copy.Path, []);

        using var store = SqliteAtlasStore.Open(copy.Path, create: false);
        Assert.Empty(store.Atlases());
        var error = Assert.Throws<InputException>(() => AtlasSnapshot.Load(store, Path.GetFileName(copy.Path)));
        Assert.Contains("the atlas file is empty", error.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void Bit_flips_anywhere_in_the_file_give_the_intact_answer_or_a_damage_error()
    {
        // Positions: every page's header bytes (b-tree flags, cell counts, pointers), a seeded spread over the whole
        // file, and bytes spread over the schema text and the rows that are not content-addressed (found by their text
        // in the file). A wider run (every 11th and every 13th byte, 15 800 flips) found no failure either.
        var reference = Reference.Value;
        var bytes = reference.Bytes;
        var positions = new SortedSet<int>();
        for (var page = 0; page < bytes.Length; page += 4096)
        {
            var header = page == 0 ? 100 : page;
            for (var i = 0; i < 12 && header + i < bytes.Length; i++)
            {
                positions.Add(header + i);
            }
        }

        var random = new Random(20260412);
        for (var i = 0; i < 400; i++)
        {
            positions.Add(random.Next(bytes.Length));
        }

        foreach (var text in reference.AimedTexts)
        {
            var at = IndexOf(bytes, Encoding.UTF8.GetBytes(text));
            if (at >= 0)
            {
                for (var i = 0; i < text.Length; i += Math.Max(1, text.Length / 16))
                {
                    positions.Add(at + i);
                }
            }
        }

        var failures = new List<string>();
        foreach (var position in positions)
        {
            var damaged = (byte[])bytes.Clone();
            var bit = 1 << (position % 8);
            damaged[position] ^= (byte)bit;
            failures.AddRange(Judge(reference, damaged, $"bit {position % 8} of byte {position} flipped", mustRefuse: false));
        }

        Assert.True(failures.Count == 0, $"{failures.Count} of {positions.Count} flips:{Environment.NewLine}{string.Join(Environment.NewLine, failures.Take(40))}");
    }

    /// <summary>
    /// Reads a damaged copy; returns what went wrong: nothing when it failed with an input error naming the file, or
    /// (unless <paramref name="mustRefuse"/>: a truncated file has lost pages) when it read exactly as the intact file.
    /// </summary>
    private static IEnumerable<string> Judge(ReferenceAtlas reference, byte[] damaged, string what, bool mustRefuse)
    {
        using var copy = new TempAtlas("damaged");
        File.WriteAllBytes(copy.Path, damaged);
        ReferenceAtlas.Reading read;
        try
        {
            read = ReferenceAtlas.Read(copy.Path, reference);
        }
        catch (InputException e)
        {
            return e.Message.Contains(Path.GetFileName(copy.Path), StringComparison.Ordinal)
                ? []
                : [$"{what}: the error does not name the file: {e.Message}"];
        }
        catch (Exception e)
        {
            return [$"{what}: {e.GetType().Name}: {e.Message}"];
        }

        if (mustRefuse)
        {
            return [$"{what}: read without error"];
        }

        if (read.Answer != reference.Intact.Answer)
        {
            return [$"{what}: read without error as a different answer:{Environment.NewLine}{FirstDifference(reference.Intact.Answer, read.Answer)}"];
        }

        // A blob found missing is recomputed (start fibers) or reported by its reader (models); a blob found must be the
        // one stored.
        return read.Blobs
            .Where(b => reference.Intact.Blobs.GetValueOrDefault(b.Key) != b.Value)
            .Select(b => $"{what}: blob {b.Key} read without error with other content");
    }

    private static string FirstDifference(string expected, string actual)
    {
        var a = expected.Split('\n');
        var b = actual.Split('\n');
        for (var i = 0; i < Math.Max(a.Length, b.Length); i++)
        {
            var left = i < a.Length ? a[i] : "(none)";
            var right = i < b.Length ? b[i] : "(none)";
            if (left != right)
            {
                return $"  intact:  {Clip(left)}{Environment.NewLine}  damaged: {Clip(right)}";
            }
        }

        return "  (same lines)";
    }

    private static string Clip(string line) => line.Length > 200 ? line[..200] + "…" : line;

    private static int IndexOf(byte[] haystack, byte[] needle) => haystack.AsSpan().IndexOf(needle);

    /// <summary>
    /// An atlas with every table in use: two sweep versions under different options, a derived version with a blob,
    /// and a sweep still running with a kept request, merged tiles and attempts. Built once per test run.
    /// </summary>
    private sealed class ReferenceAtlas
    {
        private ReferenceAtlas(byte[] bytes, Reading? intact, long[] sweeps, string[] blobs, string[] aimedTexts)
        {
            Bytes = bytes;
            Intact = intact!;
            SweepIds = sweeps;
            BlobKeys = blobs;
            AimedTexts = aimedTexts;
        }

        /// <summary>The closed file's bytes (no WAL beside it).</summary>
        public byte[] Bytes { get; }

        /// <summary>Everything the store answers about the intact file, one fact a line, and its blobs.</summary>
        public Reading Intact { get; }

        public long[] SweepIds { get; }

        public string[] BlobKeys { get; }

        /// <summary>Text of rows without a content hash (summaries, options, keys) and of the schema, to aim flips at.</summary>
        public string[] AimedTexts { get; }

        public static ReferenceAtlas Build()
        {
            var family = TestFamilies.Example("cubic");
            using var atlas = new TempAtlas("reference");
            long[] sweeps;
            using (var store = atlas.Open())
            {
                var runner = new SweepRunner(store);
                var first = runner.Run(family, new SweepOptions { Divisions = [3, 3], LinesPerTile = 2, Seed = 17, MaxDegreeOfParallelism = 2 });
                runner.Run(family, new SweepOptions { Divisions = [2, 2], LinesPerTile = 3, Seed = 17, MaxDegreeOfParallelism = 2 });
                var extra = new Contracts.V1.TileResult { FamilyHash = family.ContentHash, TileKey = "learned:v3" };
                extra.Samples.Add(new Contracts.V1.Sample { Label = 3, Kind = Contracts.V1.SampleKind.Resolved, Point = { -2.0, 0.5 } });
                var payload = extra.ToByteArray();
                store.CommitDerived(
                    first.AtlasId, 2, "model", "model:knn;reference", [("learned:v3", AtlasStoreRules.HashOf(payload), payload)], ("model/reference/{version}", [7, 7, 7]), _ => ("derived-hash", "{\"tiles\":10}"));

                var (running, _) = store.BeginOrResumeSweep(first.AtlasId, "reference-options-running", 3);
                store.SaveSweepRequest(running, first.AtlasId, Encoding.UTF8.GetBytes("request of the running sweep"));
                var tile = store.Tile(store.VersionTiles(first.AtlasId, 2)["L0:1,1"]);
                Assert.True(store.MergeTile(running, "L0:1,1", tile.TileHash, tile.Payload));
                var started = new DateTimeOffset(2026, 4, 12, 10, 11, 12, TimeSpan.Zero);
                store.RecordAttempt(new TileAttempt(running, "L0:1,1", 1, "worker-a", started, 1.25, "timeout", "no answer in 30 s"));
                store.RecordAttempt(new TileAttempt(running, "L0:1,1", 2, "worker-b", started.AddSeconds(31), 0.5, "merged", string.Empty));
                sweeps = [1, 2, running];
            }

            var bytes = File.ReadAllBytes(atlas.Path);
            Assert.False(File.Exists(atlas.Path + "-wal") && new FileInfo(atlas.Path + "-wal").Length > 0, "the closed atlas left a WAL file");
            var blobs = Enumerable.Range(0, (int)RawSqlite.Scalar(atlas.Path, "SELECT COUNT(*) FROM blobs", readOnly: true))
                .Select(i => RawSqlite.Text(atlas.Path, $"SELECT blob_key FROM blobs ORDER BY blob_key LIMIT 1 OFFSET {i}"))
                .ToArray();
            var texts = new List<string> { "options_text TEXT NOT NULL", "ADD COLUMN row_check", "reference-options-running", "model:knn;reference", "derived-hash", "worker-a", "no answer in 30 s", "request of the running sweep" };
            for (var version = 1; version <= 3; version++)
            {
                texts.Add(RawSqlite.Text(atlas.Path, $"SELECT summary_json FROM versions WHERE version = {version}"));
                texts.Add(RawSqlite.Text(atlas.Path, $"SELECT options_text FROM versions WHERE version = {version}"));
            }

            texts.Add(RawSqlite.Text(atlas.Path, "SELECT family_json FROM atlases"));
            var shell = new ReferenceAtlas(bytes, null, sweeps, blobs, [.. texts]);
            return new ReferenceAtlas(bytes, Read(atlas.Path, shell), sweeps, blobs, [.. texts]);
        }

        /// <summary>Opens a file (never creating one) and reads everything the store can say about it.</summary>
        public static Reading Read(string path, ReferenceAtlas reference)
        {
            var text = new StringBuilder();
            using var store = SqliteAtlasStore.Open(path, create: false);
            foreach (var atlasId in store.Atlases())
            {
                var (familyHash, familyJson) = store.Family(atlasId)!.Value;
                text.Append("atlas ").Append(atlasId).Append(' ').Append(familyHash).Append(' ').Append(familyJson).Append('\n');
                foreach (var version in store.Versions(atlasId))
                {
                    text.Append(version).Append('\n');
                    foreach (var (key, hash) in store.VersionTiles(atlasId, version.Version).OrderBy(t => t.Key, StringComparer.Ordinal))
                    {
                        text.Append("  ").Append(key).Append(' ').Append(hash).Append(' ').Append(store.Tile(hash).Payload.Length).Append('\n');
                    }
                }

                var snapshot = AtlasSnapshot.Load(store, Path.GetFileName(path), atlasId: atlasId);
                text.Append("snapshot v").Append(snapshot.Version.Version).Append(' ').Append(snapshot.Samples.Count).Append(' ').Append(snapshot.Crossings.Count).Append('\n');
            }

            foreach (var sweepId in reference.SweepIds)
            {
                text.Append(store.Sweep(sweepId)?.ToString() ?? $"no sweep {sweepId}").Append('\n');
                foreach (var attempt in store.Attempts(sweepId))
                {
                    text.Append("  ").Append(attempt).Append('\n');
                }
            }

            foreach (var request in store.UnfinishedSweepRequests())
            {
                text.Append("request ").Append(request.SweepId).Append(' ').Append(request.AtlasId).Append(' ').Append(Convert.ToHexString(request.Request)).Append('\n');
            }

            var blobs = new Dictionary<string, string>(StringComparer.Ordinal);
            foreach (var key in reference.BlobKeys)
            {
                if (store.GetBlob(key) is { } blob)
                {
                    blobs[key] = Convert.ToHexStringLower(SHA256.HashData(blob));
                }
            }

            return new Reading(text.ToString(), blobs);
        }

        /// <summary>The answer, and the blobs found (hash by key).</summary>
        public sealed record Reading(string Answer, IReadOnlyDictionary<string, string> Blobs);
    }
}
