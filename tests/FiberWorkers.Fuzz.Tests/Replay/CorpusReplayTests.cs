using System.Text;
using FiberWorkers.Fuzz.Tests.Engine;

namespace FiberWorkers.Fuzz.Tests.Replay;

/// <summary>
/// Every file of <c>Corpus/families</c> and <c>Corpus/regressions</c> read on every run, its outcome compared with
/// the <c>.expected</c> file beside it (same name up to the first dot): the summary of a valid file, or the exact
/// error message with its locations. <c>FIBER_FUZZ_RECORD=1</c> writes a missing <c>.expected</c> (review it before
/// committing: it is the assertion).
/// </summary>
public sealed class CorpusReplayTests
{
    public static TheoryData<string> FamilyCorpus => Files(FuzzPaths.FamilyCorpus);

    public static TheoryData<string> Regressions => Files(FuzzPaths.Regressions);

    [Theory]
    [MemberData(nameof(FamilyCorpus))]
    public void Each_seed_family_reads_to_its_expected_outcome(string file) =>
        AssertExpected(Path.Combine(FuzzPaths.FamilyCorpus, file));

    [Theory]
    [MemberData(nameof(Regressions))]
    public void Each_regression_input_gives_its_expected_outcome(string file) =>
        AssertExpected(Path.Combine(FuzzPaths.Regressions, file));

    [Fact]
    public void Every_expected_file_belongs_to_an_input()
    {
        foreach (var directory in new[] { FuzzPaths.FamilyCorpus, FuzzPaths.Regressions })
        {
            var stems = Directory.GetFiles(directory).Where(f => !f.EndsWith(".expected", StringComparison.Ordinal)).Select(Stem).ToHashSet();
            foreach (var expected in Directory.GetFiles(directory, "*.expected"))
            {
                Assert.True(stems.Contains(Stem(expected)), $"{expected} has no input file beside it");
            }
        }
    }

    private static void AssertExpected(string path)
    {
        var actual = Bounded.Run(() => Outcome.Of(path), Bounded.ReplayLimit, $"reading {Path.GetFileName(path)}");
        var expectedPath = Path.Combine(Path.GetDirectoryName(path)!, Stem(path) + ".expected");
        if (!File.Exists(expectedPath))
        {
            if (Environment.GetEnvironmentVariable("FIBER_FUZZ_RECORD") == "1")
            {
                File.WriteAllText(expectedPath, actual + "\n", new UTF8Encoding(false));
                Assert.Fail($"recorded {expectedPath}; review it, then run again:\n{actual}");
            }

            Assert.Fail($"{expectedPath} is missing (FIBER_FUZZ_RECORD=1 writes it); the outcome is:\n{actual}");
        }

        var expected = File.ReadAllText(expectedPath).ReplaceLineEndings("\n").TrimEnd('\n');
        Assert.Equal(expected, actual);
    }

    private static string Stem(string path)
    {
        var name = Path.GetFileName(path);
        var dot = name.IndexOf('.', StringComparison.Ordinal);
        return dot < 0 ? name : name[..dot];
    }

    private static TheoryData<string> Files(string directory)
    {
        var data = new TheoryData<string>();
        foreach (var file in Directory.GetFiles(directory).Where(f => !f.EndsWith(".expected", StringComparison.Ordinal) && !Path.GetFileName(f).StartsWith('.')).Order(StringComparer.Ordinal))
        {
            data.Add(Path.GetFileName(file));
        }

        return data;
    }
}
