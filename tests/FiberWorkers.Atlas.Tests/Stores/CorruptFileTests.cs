using System.Globalization;
using System.Text;
using FiberWorkers.Algebra.Families;
using FiberWorkers.Atlas.Resolve;
using FiberWorkers.Atlas.Stores;
using FiberWorkers.Atlas.Sweeps;
using FiberWorkers.Atlas.Tests.Support;
using FiberWorkers.Solving.Randomness;
using FiberWorkers.Testing;
using Xunit.Abstractions;

namespace FiberWorkers.Atlas.Tests.Stores;

/// <summary>
/// Property: a truncated or bit-flipped atlas file, opened, loaded and asked exactly as <c>fiber ask</c> does (open
/// without creating, the latest version, a resolver from the stored start fiber, real-only tracking with the full
/// solve as fallback), either fails with an <see cref="InputException"/> whose message names the file, or gives the
/// very answers of the intact file — never another exception, never a different answer. Cases are drawn from fixed
/// seeds; each failure names the case so it can be replayed. (<see cref="DamagedAtlasFileTests"/> covers every table
/// through the store's own reads; this covers the path from file to answer.)
/// </summary>
public sealed class CorruptFileTests(ITestOutputHelper output)
{
    private const int PageSize = 4096;

    private static readonly Lazy<Intact> Reference = new(Intact.Build);

    [Fact]
    public void The_intact_file_answers_every_ask_by_real_tracking_or_a_full_solve_and_spans_many_pages()
    {
        // The property is only as strong as its reference: answers must exist, use both methods, and the file must
        // have enough pages that flips land in b-tree interiors, leaves, overflow and free space.
        var reference = Reference.Value;

        var answers = reference.Answers.Split('\n', StringSplitOptions.RemoveEmptyEntries);

        Assert.True(reference.Bytes.Length >= 12 * PageSize, $"the reference atlas is only {reference.Bytes.Length} bytes");
        Assert.Contains(answers, a => a.Contains("real-track", StringComparison.Ordinal));
        Assert.Contains(answers, a => a.Contains(" full ", StringComparison.Ordinal));
        Assert.Contains(answers, a => a.Contains(" 3 real", StringComparison.Ordinal));
        Assert.Contains(answers, a => a.Contains(" 1 real", StringComparison.Ordinal));
    }

    [Fact]
    public void Truncations_at_seeded_lengths_are_refused_with_an_error_naming_the_file()
    {
        // Lengths: inside the 100-byte header, page boundaries and one byte either side, one byte short, and a seeded
        // spread over the file. Every truncation loses pages the file's header still counts, so each must be refused.
        var reference = Reference.Value;
        var length = reference.Bytes.Length;
        var lengths = new SortedSet<int> { 1, 16, 27, 28, 99, 100, 101, PageSize - 1, PageSize, PageSize + 1, length - PageSize, length - 1 };
        for (var page = 2 * PageSize; page < length; page += 3 * PageSize)
        {
            lengths.Add(page);
            lengths.Add(page + 100);
        }

        var random = new SeededRandom(20261202);
        for (var i = 0; i < 60; i++)
        {
            lengths.Add(1 + random.NextInt(length - 1));
        }

        var failures = new List<string>();
        foreach (var keep in lengths)
        {
            failures.AddRange(Judge(reference, reference.Bytes[..keep], $"truncated to {keep} of {length} bytes", mustRefuse: true));
        }

        Assert.True(failures.Count == 0, $"{failures.Count} of {lengths.Count} truncations:{Environment.NewLine}{string.Join(Environment.NewLine, failures.Take(30))}");
    }

    [Fact]
    public void A_file_truncated_to_zero_bytes_is_refused_as_empty_naming_the_file()
    {
        // SQLite takes an empty file for a new, empty database: loading says there is no atlas in it.
        var failures = Judge(Reference.Value, [], "truncated to 0 bytes", mustRefuse: true).ToList();

        Assert.Empty(failures);
    }

    [Fact]
    public void Seeded_bit_flips_anywhere_give_the_intact_answers_or_an_error_naming_the_file()
    {
        // Positions: the 100-byte file header, the first bytes of every page (b-tree page headers: flags, first free
        // block, cell count, content start, right child), the cell pointer arrays after them, and a seeded spread over
        // the whole file (payloads, overflow and free pages).
        var reference = Reference.Value;
        var bytes = reference.Bytes;
        var flips = new SortedSet<(int Position, int Bit)>();
        for (var i = 0; i < 100; i += 3)
        {
            flips.Add((i, i % 8));
        }

        for (var page = 0; page < bytes.Length; page += PageSize)
        {
            var header = page == 0 ? 100 : page;
            for (var i = 0; i < 16 && header + i < bytes.Length; i += 2)
            {
                flips.Add((header + i, (page / PageSize) % 8));
            }
        }

        var random = new SeededRandom(20261203);
        for (var i = 0; i < 250; i++)
        {
            flips.Add((random.NextInt(bytes.Length), random.NextInt(8)));
        }

        var failures = new List<string>();
        var refused = 0;
        foreach (var (position, bit) in flips)
        {
            var damaged = (byte[])bytes.Clone();
            damaged[position] ^= (byte)(1 << bit);
            var found = Judge(reference, damaged, $"bit {bit} of byte {position} (page {(position / PageSize) + 1}) flipped", mustRefuse: false, onRefused: () => refused++).ToList();
            failures.AddRange(found);
        }

        output.WriteLine($"{flips.Count} flips: {refused} refused as damaged, {flips.Count - refused - failures.Count} answered as the intact file");
        Assert.True(failures.Count == 0, $"{failures.Count} of {flips.Count} flips:{Environment.NewLine}{string.Join(Environment.NewLine, failures.Take(30))}");
        Assert.True(refused > flips.Count / 10, $"only {refused} of {flips.Count} flips were detected: the cases miss the data");
    }

    [Fact]
    public void A_damaged_column_type_in_a_schema_text_of_several_lines_is_refused_on_one_line()
    {
        // Found by the seeded flips: the CREATE TABLE text of sweep_tiles spans two lines, and the schema check
        // quoted it as it stood. Flip 'TEXT' to 'TUXT' in that statement.
        var reference = Reference.Value;
        var text = System.Text.Encoding.ASCII.GetBytes("tile_key TEXT NOT NULL, tile_hash");
        var at = reference.Bytes.AsSpan().IndexOf(text);
        Assert.True(at >= 0, "the schema text of sweep_tiles was not found in the file");
        var damaged = (byte[])reference.Bytes.Clone();
        damaged[at + "tile_key T".Length] = (byte)'U';

        var failures = Judge(reference, damaged, "column type TEXT damaged to TUXT in sweep_tiles", mustRefuse: true).ToList();

        Assert.True(failures.Count == 0, string.Join(Environment.NewLine, failures));
    }

    /// <summary>
    /// Opens a damaged copy the way the CLI does and asks it; returns what went wrong: nothing when it failed with an
    /// input error naming the file, or (unless <paramref name="mustRefuse"/>) when every answer equals the intact one.
    /// </summary>
    private static IEnumerable<string> Judge(Intact reference, byte[] damaged, string what, bool mustRefuse, Action? onRefused = null)
    {
        using var copy = new TempAtlas("damaged");
        File.WriteAllBytes(copy.Path, damaged);
        string answers;
        try
        {
            answers = Intact.Ask(copy.Path, reference.Points);
        }
        catch (InputException e)
        {
            onRefused?.Invoke();
            var named = e.Message.StartsWith(Path.GetFileName(copy.Path), StringComparison.Ordinal) || e.Message.StartsWith(copy.Path, StringComparison.Ordinal);
            return named && !e.Message.Contains('\n', StringComparison.Ordinal)
                ? []
                : [$"{what}: the error does not begin with the file's name on one line: {e.Message}"];
        }
        catch (Exception e)
        {
            return [$"{what}: {e.GetType().Name}: {e.Message}"];
        }

        if (mustRefuse)
        {
            return [$"{what}: loaded and answered without error"];
        }

        return answers == reference.Answers ? [] : [$"{what}: answered differently:{Environment.NewLine}  intact:  {reference.Answers.Replace("\n", " | ", StringComparison.Ordinal)}{Environment.NewLine}  damaged: {answers.Replace("\n", " | ", StringComparison.Ordinal)}"];
    }

    /// <summary>
    /// A cubic atlas (x³ + b·x + c: three real roots inside the cusp 4b³ + 27c² &lt; 0, one outside) of two sweep
    /// versions, the answers at fixed points on both sides of the cusp and outside the box, and the closed file's bytes.
    /// </summary>
    private sealed class Intact
    {
        private Intact(byte[] bytes, double[][] points, string answers)
        {
            Bytes = bytes;
            Points = points;
            Answers = answers;
        }

        public byte[] Bytes { get; }

        public double[][] Points { get; }

        /// <summary>The latest version's content and every answer, one a line, values in round-trip form.</summary>
        public string Answers { get; }

        public static Intact Build()
        {
            var family = TestFamilies.Example("cubic");
            using var atlas = new TempAtlas("reference");
            using (var store = atlas.Open())
            {
                var runner = new SweepRunner(store);
                runner.Run(family, new SweepOptions { Divisions = [2, 2], LinesPerTile = 2, Seed = 5, MaxDegreeOfParallelism = 2 });
                runner.Run(family, new SweepOptions { Divisions = [3, 3], LinesPerTile = 3, Seed = 5, MaxDegreeOfParallelism = 2 });
            }

            Assert.False(File.Exists(atlas.Path + "-wal") && new FileInfo(atlas.Path + "-wal").Length > 0, "the closed atlas left a WAL file");

            // Inside the cusp (b < 0, small c), outside it, near its edge, and beyond the box (solved in full).
            var box = family.Parameters;
            double[][] points =
            [
                [box[0].Low + (0.2 * box[0].Width), box[1].Low + (0.5 * box[1].Width)],
                [box[0].Low + (0.9 * box[0].Width), box[1].Low + (0.3 * box[1].Width)],
                [box[0].Low + (0.35 * box[0].Width), box[1].Low + (0.8 * box[1].Width)],
                [box[0].Low + (0.6 * box[0].Width), box[1].Low + (0.55 * box[1].Width)],
                [box[0].High + (0.1 * box[0].Width), box[1].Low],
            ];
            return new Intact(File.ReadAllBytes(atlas.Path), points, Ask(atlas.Path, points));
        }

        /// <summary>What <c>fiber ask FILE --at …</c> computes, as text.</summary>
        public static string Ask(string path, double[][] points)
        {
            var source = Path.GetFileName(path);
            using var store = SqliteAtlasStore.Open(path, create: false);
            var snapshot = AtlasSnapshot.Load(store, source);
            var resolver = AtlasResolver.Create(store, snapshot);
            var text = new StringBuilder();
            text.Append(CultureInfo.InvariantCulture, $"v{snapshot.Version.Version} {snapshot.Version.ContentHash} {snapshot.Tiles.Count} tiles {snapshot.Samples.Count} samples {snapshot.Crossings.Count} crossings\n");
            foreach (var point in points)
            {
                var answer = resolver.Ask(point);
                text.Append(CultureInfo.InvariantCulture, $"{point[0]:R},{point[1]:R}: {answer.Method} {answer.RealCount} real {answer.Certified} {answer.StartSample} [");
                foreach (var solution in answer.Solutions)
                {
                    text.AppendJoin(',', solution.Values.Select(v => v.Real.ToString("R", CultureInfo.InvariantCulture))).Append(';');
                }

                text.Append("]\n");
            }

            return text.ToString();
        }
    }
}
