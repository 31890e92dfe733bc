using FiberWorkers.Fuzz.Tests.Decoding;
using FiberWorkers.Fuzz.Tests.Families;
using FiberWorkers.Fuzz.Tests.StartFibers;
using FiberWorkers.Solving.Randomness;

namespace FiberWorkers.Fuzz.Tests.Engine;

/// <summary>The harness itself: it must catch wrong exceptions and hangs, minimize and save them, and replay by seed.</summary>
[Collection(FuzzCollection.Name)]
public sealed class FuzzRunnerTests : IDisposable
{
    private readonly string _directory = Directory.CreateTempSubdirectory("fuzz-runner-tests-").FullName;

    public void Dispose() => Directory.Delete(_directory, recursive: true);

    [Fact]
    public void A_wrong_exception_is_reported_with_its_input_minimized_to_the_offending_byte_and_saved()
    {
        var settings = new FuzzSettings(1, 7, TimeSpan.FromSeconds(2), null);
        var target = new FuzzTarget("bytes", RandomBytes, input => input.Contains((byte)0x42) ? throw new InvalidOperationException("B") : "ok", ".bin");

        var report = new FuzzRunner(settings, _directory).Run(target, TimeSpan.FromSeconds(0.3));

        var finding = Assert.Single(report.Findings);
        Assert.Equal(FuzzFindingKind.Failure, finding.Kind);
        Assert.Equal("System.InvalidOperationException: B", finding.Signature);
        Assert.Equal([0x42], finding.Minimized);
        Assert.Equal([0x42], File.ReadAllBytes(finding.SavedPath));
        Assert.Contains((byte)0x42, finding.Input);
        Assert.True(report.Count("ok") > 0);
    }

    [Fact]
    public void An_input_that_does_not_finish_within_the_bound_is_reported_as_a_hang()
    {
        var settings = new FuzzSettings(1, 7, TimeSpan.FromSeconds(0.3), null);
        using var release = new ManualResetEventSlim();
        var target = new FuzzTarget(
            "hang", random => [(byte)random.NextInt(256)], input => { if (input[0] == 0x99) { release.Wait(); } return "ok"; }, ".bin");

        var report = new FuzzRunner(settings, _directory).Run(target, TimeSpan.FromSeconds(30));
        release.Set();

        var finding = Assert.Single(report.Findings);
        Assert.Equal(FuzzFindingKind.Hang, finding.Kind);
        Assert.Equal([0x99], finding.Input);
        Assert.True(report.Elapsed < TimeSpan.FromSeconds(25), $"the hang took {report.Elapsed} to report");
    }

    [Fact]
    public void Replaying_one_input_index_reproduces_exactly_that_input()
    {
        var seen = new List<byte[]>();
        var target = new FuzzTarget("replay", FamilyInputs.Mutant, input => { seen.Add(input); return "ok"; }, ".json");
        var expected = FamilyInputs.Mutant(FuzzRunner.InputRandom(11, "replay", 123));

        var report = new FuzzRunner(new FuzzSettings(1, 11, TimeSpan.FromSeconds(2), 123), _directory).Run(target, TimeSpan.FromSeconds(10));

        Assert.Equal(1, report.Inputs);
        Assert.Equal(expected, Assert.Single(seen));
    }

    [Fact]
    public void Inputs_are_a_pure_function_of_seed_target_and_index()
    {
        foreach (var generate in new Func<SeededRandom, byte[]>[]
        {
            FamilyInputs.Mutant, FamilyInputs.Generated, StartFiberInputs.Mutant,
            random => MessageProperty.Mutant(DecodingTargets.Get("AskRequest"), random),
        })
        {
            var first = Enumerable.Range(0, 200).Select(i => generate(FuzzRunner.InputRandom(5, "t", i))).ToList();
            var again = Enumerable.Range(0, 200).Select(i => generate(FuzzRunner.InputRandom(5, "t", i))).ToList();
            var otherSeed = Enumerable.Range(0, 200).Select(i => generate(FuzzRunner.InputRandom(6, "t", i))).ToList();

            Assert.Equal(first, again);
            Assert.NotEqual(first, otherSeed);
            Assert.True(first.Distinct(new BytesComparer()).Count() > 150, "the mutants should mostly differ");
        }
    }

    [Fact]
    public void Settings_come_from_the_environment_with_small_deterministic_defaults_and_clear_errors()
    {
        var defaults = FuzzSettings.FromEnvironment(_ => null);
        var custom = FuzzSettings.FromEnvironment(name => name switch
        {
            "FIBER_FUZZ_SECONDS" => "3600",
            "FIBER_FUZZ_SEED" => "0xFF",
            "FIBER_FUZZ_INPUT_SECONDS" => "0.5",
            "FIBER_FUZZ_INPUT" => "77",
            _ => null,
        });
        var error = Assert.Throws<InvalidOperationException>(() => FuzzSettings.FromEnvironment(name => name == "FIBER_FUZZ_SECONDS" ? "ten" : null));

        Assert.Equal(new FuzzSettings(20, FuzzSettings.DefaultSeed, TimeSpan.FromSeconds(2), null), defaults);
        Assert.Equal(new FuzzSettings(3600, 255, TimeSpan.FromSeconds(0.5), 77), custom);
        Assert.Equal("FIBER_FUZZ_SECONDS: expected a positive number of seconds, found 'ten'", error.Message);
    }

    private static byte[] RandomBytes(SeededRandom random)
    {
        var bytes = new byte[40];
        for (var i = 0; i < bytes.Length; i++)
        {
            bytes[i] = (byte)random.NextInt(256);
        }

        return bytes;
    }

    private sealed class BytesComparer : IEqualityComparer<byte[]>
    {
        public bool Equals(byte[]? x, byte[]? y) => x.AsSpan().SequenceEqual(y);

        public int GetHashCode(byte[] obj)
        {
            var hash = new HashCode();
            hash.AddBytes(obj);
            return hash.ToHashCode();
        }
    }
}
