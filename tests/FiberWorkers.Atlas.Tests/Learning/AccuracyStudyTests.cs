using FiberWorkers.Atlas.Learning;
using FiberWorkers.Atlas.Stores;
using FiberWorkers.Atlas.Sweeps;
using FiberWorkers.Atlas.Tests.Support;
using FiberWorkers.Testing;

namespace FiberWorkers.Atlas.Tests.Learning;

public sealed class AccuracyStudyTests
{
    [Fact]
    public void On_the_cubic_training_with_near_boundary_samples_beats_uniform_only_near_the_locus()
    {
        // Dense lines and a wide δ make near-boundary samples informative (the lateral spacing of crossings must be
        // comparable to δ); uniform-only training then loses accuracy next to the locus, as expected.
        using var atlas = new TempAtlas("study");
        using var store = atlas.Open();
        new SweepRunner(store).Run(
            TestFamilies.Example("cubic"), new SweepOptions { Divisions = [4, 4], LinesPerTile = 60, DeltaFraction = 0.1, MaxDegreeOfParallelism = 2 });
        var rows = AccuracyStudy.Run(SampleSet.From(AtlasSnapshot.Load(store, "study.db")), new StudyOptions { Seed = 3 });
        double Accuracy(string training, string test) => rows.Single(r => r.Classifier == "nn1" && r.Training == training && r.Test == test).Accuracy;

        Assert.Equal(4 * 2 * 3, rows.Count);
        Assert.True(Accuracy("near-boundary", "near-boundary") > Accuracy("uniform", "near-boundary") + 0.1,
            $"near-boundary {Accuracy("near-boundary", "near-boundary"):P1} vs uniform {Accuracy("uniform", "near-boundary"):P1}");
        Assert.True(Accuracy("all", "near-boundary") >= Accuracy("uniform", "near-boundary"));
        // Far from the locus every training set does well.
        Assert.All(AccuracyStudy.TrainingSets, t => Assert.True(Accuracy(t, "uniform") > 0.85, $"{t}: {Accuracy(t, "uniform"):P1}"));
        // Training sets have one size, and test samples come from other lines than training samples.
        Assert.Single(rows.Select(r => r.TrainingSize).Distinct());
    }
}
