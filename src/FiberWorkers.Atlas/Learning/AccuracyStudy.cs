using FiberWorkers.Contracts.V1;
using FiberWorkers.Solving.Randomness;

namespace FiberWorkers.Atlas.Learning;

/// <summary>Settings of the accuracy study.</summary>
public sealed record StudyOptions
{
    /// <summary>Seed of the splits. Default 1.</summary>
    public ulong Seed { get; init; } = 1;

    /// <summary>Neighbours of the k-NN classifier. Default 5.</summary>
    public int K { get; init; } = 5;

    /// <summary>Also train and test the feedforward network (slower). Default false.</summary>
    public bool Network { get; init; }

    /// <summary>Network settings when <see cref="Network"/> is on.</summary>
    public NetworkOptions NetworkOptions { get; init; } = new();
}

/// <summary>One cell of the study: a classifier trained on one kind of samples, tested on another.</summary>
public sealed record StudyRow(string Classifier, string Training, int TrainingSize, string Test, int TestSize, int Correct)
{
    /// <summary>Share of test samples labeled right.</summary>
    public double Accuracy => TestSize == 0 ? double.NaN : (double)Correct / TestSize;
}

/// <summary>
/// Why boundary-aware sampling matters, measured: the atlas's lines are split in halves (training lines, test lines;
/// disjoint samples), classifiers are trained on uniform-only, midpoint-only, near-boundary-only and all-kinds sets of
/// the same size from the training lines, and tested on the uniform, near-boundary and all samples of the test lines.
/// </summary>
public static class AccuracyStudy
{
    /// <summary>The training-set names, in table order.</summary>
    public static readonly string[] TrainingSets = ["uniform", "midpoint", "near-boundary", "all"];

    /// <summary>The test-set names, in table order.</summary>
    public static readonly string[] TestSets = ["uniform", "near-boundary", "all"];

    public static IReadOnlyList<StudyRow> Run(SampleSet samples, StudyOptions options)
    {
        ArgumentNullException.ThrowIfNull(samples);
        ArgumentNullException.ThrowIfNull(options);
        var random = new SeededRandom(SeededRandom.Derive(options.Seed, "study"));

        // Split by line, not by sample: a near-boundary pair straddles its crossing, and splitting the pair would test
        // each point against its own twin across the boundary. Whole lines go to training or to testing.
        var lines = Enumerable.Range(0, samples.Count).Select(i => (samples.Tiles[i], samples.Samples[i].Line)).Distinct().ToArray();
        Shuffle(lines, random);
        var trainingLines = lines.Take(lines.Length / 2).ToHashSet();
        var pools = new Dictionary<SampleKind, (List<int> Train, List<int> Test)>();
        foreach (var kind in new[] { SampleKind.Uniform, SampleKind.Midpoint, SampleKind.NearBoundary })
        {
            var indices = Enumerable.Range(0, samples.Count).Where(i => samples.Samples[i].Kind == kind).ToArray();
            Shuffle(indices, random);
            pools[kind] = (
                [.. indices.Where(i => trainingLines.Contains((samples.Tiles[i], samples.Samples[i].Line)))],
                [.. indices.Where(i => !trainingLines.Contains((samples.Tiles[i], samples.Samples[i].Line))).Order()]);
        }

        var budget = pools.Values.Min(p => p.Train.Count);
        if (budget < 2)
        {
            throw new ArgumentException($"too few samples of some kind for a study (smallest training pool: {budget})");
        }

        var allTrain = pools.Values.SelectMany(p => p.Train).ToArray();
        Shuffle(allTrain, random);
        var training = new Dictionary<string, int[]>
        {
            ["uniform"] = [.. pools[SampleKind.Uniform].Train.Take(budget)],
            ["midpoint"] = [.. pools[SampleKind.Midpoint].Train.Take(budget)],
            ["near-boundary"] = [.. pools[SampleKind.NearBoundary].Train.Take(budget)],
            ["all"] = [.. allTrain.Take(budget)],
        };
        var tests = new Dictionary<string, int[]>
        {
            ["uniform"] = [.. pools[SampleKind.Uniform].Test],
            ["near-boundary"] = [.. pools[SampleKind.NearBoundary].Test],
            ["all"] = [.. pools.Values.SelectMany(p => p.Test).Order()],
        };

        var rows = new List<StudyRow>();
        foreach (var trainingName in TrainingSets)
        {
            var set = samples.Subset(training[trainingName]);
            var classifiers = new List<RegionClassifier> { new NearestNeighbourClassifier(set, 1), new NearestNeighbourClassifier(set, options.K) };
            if (options.Network && set.Labels.Distinct().Count() > 1)
            {
                classifiers.Add(new NetworkClassifier(NetworkTrainer.Train(set.Points, set.Labels, set.Dimension, options.NetworkOptions).Network));
            }

            foreach (var classifier in classifiers)
            {
                foreach (var testName in TestSets)
                {
                    var correct = 0;
                    foreach (var index in tests[testName])
                    {
                        correct += classifier.Classify(samples.Points.AsSpan(index * samples.Dimension, samples.Dimension)) == samples.Labels[index] ? 1 : 0;
                    }

                    rows.Add(new StudyRow(classifier.Name, trainingName, set.Count, testName, tests[testName].Length, correct));
                }
            }
        }

        return rows;
    }

    private static void Shuffle<T>(T[] values, SeededRandom random)
    {
        for (var i = values.Length - 1; i > 0; i--)
        {
            var j = random.NextInt(i + 1);
            (values[i], values[j]) = (values[j], values[i]);
        }
    }
}
