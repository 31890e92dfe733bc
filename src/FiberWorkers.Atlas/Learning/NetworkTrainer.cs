using FiberWorkers.Solving.Randomness;

namespace FiberWorkers.Atlas.Learning;

/// <summary>Settings of network training.</summary>
public sealed record NetworkOptions
{
    /// <summary>Hidden layer sizes. Default 64, 64.</summary>
    public IReadOnlyList<int> Hidden { get; init; } = [64, 64];

    /// <summary>Most passes over the training set. Default 300.</summary>
    public int Epochs { get; init; } = 300;

    /// <summary>Samples per gradient step. Default 128.</summary>
    public int BatchSize { get; init; } = 128;

    /// <summary>Adam's step size (Kingma &amp; Ba 2015). Default 3e-3, halved when validation stalls.</summary>
    public double LearningRate { get; init; } = 3e-3;

    /// <summary>Share of the samples held out for early stopping. Default 0.1.</summary>
    public double ValidationFraction { get; init; } = 0.1;

    /// <summary>Stop after this many epochs without a better validation loss. Default 30.</summary>
    public int Patience { get; init; } = 30;

    /// <summary>Seed of initialization, shuffling and the held-out split. Default 1.</summary>
    public ulong Seed { get; init; } = 1;

    /// <summary>
    /// Fourier features of the input (m random frequency vectors, so 2m inputs to the first hidden layer), or 0 for
    /// the plain coordinates. Default 0.
    /// </summary>
    public int FourierFeatures { get; init; }

    /// <summary>Standard deviation of the Fourier frequencies (Gaussian, per coordinate of u in [−1, 1]). Default 2.</summary>
    public double FourierScale { get; init; } = 2;

    /// <summary>Threads computing each batch's gradient (the result does not depend on it). Default: all cores.</summary>
    public int Threads { get; init; } = Environment.ProcessorCount;
}

/// <summary>One epoch of training.</summary>
public readonly record struct EpochRecord(int Epoch, double TrainingLoss, double ValidationLoss, double ValidationAccuracy, double LearningRate);

/// <summary>
/// Trains a <see cref="FeedforwardNetwork"/> by cross-entropy with Adam on mini-batches, seeded Glorot
/// initialization, and early stopping on a held-out split (the best weights are kept). Labels are exact, so no
/// regularization against noise is used. Each batch's gradient is summed from a fixed number of chunks in a fixed
/// order, so training gives bit-identical networks on any number of threads.
/// </summary>
public static class NetworkTrainer
{
    private const int Chunks = 8;

    /// <summary>Trains on inputs (row-major, normalized to [0, 1]) and their labels.</summary>
    public static (FeedforwardNetwork Network, IReadOnlyList<EpochRecord> History) Train(double[] inputs, int[] labels, int dimension, NetworkOptions options)
    {
        ArgumentNullException.ThrowIfNull(inputs);
        ArgumentNullException.ThrowIfNull(labels);
        ArgumentNullException.ThrowIfNull(options);
        if (inputs.Length != labels.Length * dimension || labels.Length < 2)
        {
            throw new ArgumentException("need at least two samples, each with one label and dimension coordinates");
        }

        var classes = labels.Distinct().Order().ToArray();
        var classOf = labels.Select(l => Array.IndexOf(classes, l)).ToArray();
        if (options.FourierFeatures < 0 || !(options.FourierScale > 0) || !double.IsFinite(options.FourierScale))
        {
            throw new ArgumentException("Fourier features need a count of at least 0 and a positive, finite scale");
        }

        int[] sizes = [options.FourierFeatures > 0 ? 2 * options.FourierFeatures : dimension, .. options.Hidden, classes.Length];
        var random = new SeededRandom(SeededRandom.Derive(options.Seed, "network"));
        double[]? frequencies = null;
        if (options.FourierFeatures > 0)
        {
            // From their own stream, so the split and the initial weights are those of the same seed without features.
            var waves = new SeededRandom(SeededRandom.Derive(options.Seed, "fourier-features"));
            frequencies = new double[options.FourierFeatures * dimension];
            for (var i = 0; i < frequencies.Length; i++)
            {
                frequencies[i] = options.FourierScale * waves.NextGaussian();
            }
        }

        // Held-out split and initial weights, both from the seed.
        var order = Enumerable.Range(0, labels.Length).ToArray();
        Shuffle(order, random);
        var validationCount = Math.Clamp((int)(labels.Length * options.ValidationFraction), 1, labels.Length - 1);
        var validation = order[..validationCount];
        var training = order[validationCount..];
        var parameters = Initialize(sizes, random);
        var network = new FeedforwardNetwork(sizes, parameters, classes, frequencies);

        var adam = new AdamState(parameters.Length);
        var chunkGradients = Enumerable.Range(0, Chunks).Select(_ => new double[parameters.Length]).ToArray();
        var chunkLosses = new double[Chunks];
        var workspaces = Enumerable.Range(0, Chunks).Select(_ => network.CreateWorkspace()).ToArray();
        var gradient = new double[parameters.Length];
        var best = (double[])parameters.Clone();
        var bestLoss = double.PositiveInfinity;
        var sinceBest = 0;
        var learningRate = options.LearningRate;
        var history = new List<EpochRecord>();
        for (var epoch = 1; epoch <= options.Epochs; epoch++)
        {
            Shuffle(training, random);
            var epochLoss = 0.0;
            for (var start = 0; start < training.Length; start += options.BatchSize)
            {
                var batch = training.AsSpan(start, Math.Min(options.BatchSize, training.Length - start)).ToArray();
                Parallel.For(
                    0,
                    Chunks,
                    new ParallelOptions { MaxDegreeOfParallelism = Math.Max(1, options.Threads) },
                    c =>
                    {
                        Array.Clear(chunkGradients[c]);
                        chunkLosses[c] = 0;
                        for (var b = c; b < batch.Length; b += Chunks)
                        {
                            var index = batch[b];
                            chunkLosses[c] += Backpropagate(network, inputs.AsSpan(index * dimension, dimension), classOf[index], workspaces[c], chunkGradients[c]);
                        }
                    });
                Array.Clear(gradient);
                for (var c = 0; c < Chunks; c++)
                {
                    epochLoss += chunkLosses[c];
                    var part = chunkGradients[c];
                    for (var p = 0; p < gradient.Length; p++)
                    {
                        gradient[p] += part[p];
                    }
                }

                var scale = 1.0 / batch.Length;
                for (var p = 0; p < gradient.Length; p++)
                {
                    gradient[p] *= scale;
                }

                adam.Step(parameters, gradient, learningRate);
            }

            var (loss, accuracy) = Evaluate(network, inputs, classOf, validation, dimension, workspaces[0]);
            history.Add(new EpochRecord(epoch, epochLoss / training.Length, loss, accuracy, learningRate));
            if (loss < bestLoss)
            {
                bestLoss = loss;
                Array.Copy(parameters, best, parameters.Length);
                sinceBest = 0;
            }
            else if (++sinceBest >= options.Patience)
            {
                break;
            }
            else if (sinceBest % Math.Max(1, options.Patience / 3) == 0)
            {
                // A plateau: smaller steps let Adam settle into the narrow valleys sharp boundaries need.
                learningRate *= 0.5;
            }
        }

        return (new FeedforwardNetwork(sizes, best, classes, frequencies), history);
    }

    /// <summary>Cross-entropy at one sample; adds its gradient to <paramref name="gradient"/>.</summary>
    internal static double Backpropagate(FeedforwardNetwork network, ReadOnlySpan<double> input, int target, NetworkWorkspace workspace, double[] gradient)
    {
        var output = network.Forward(input, workspace);
        var loss = -Math.Log(Math.Max(output[target], 1e-300));
        var sizes = network.LayerSizes;
        var layers = sizes.Length - 1;

        // Output delta of softmax with cross-entropy: p − onehot.
        var delta = workspace.Deltas[layers];
        for (var c = 0; c < delta.Length; c++)
        {
            delta[c] = output[c] - (c == target ? 1 : 0);
        }

        var offsets = new int[layers + 1];
        for (var l = 1; l <= layers; l++)
        {
            offsets[l] = offsets[l - 1] + (sizes[l] * sizes[l - 1]) + sizes[l];
        }

        for (var l = layers; l >= 1; l--)
        {
            var (rows, columns) = (sizes[l], sizes[l - 1]);
            var offset = offsets[l - 1];
            var below = workspace.Activations[l - 1];
            var current = workspace.Deltas[l];
            for (var j = 0; j < rows; j++)
            {
                var d = current[j];
                if (d == 0)
                {
                    continue;
                }

                var row = gradient.AsSpan(offset + (j * columns), columns);
                for (var i = 0; i < columns; i++)
                {
                    row[i] += d * below[i];
                }

                gradient[offset + (rows * columns) + j] += d;
            }

            if (l > 1)
            {
                var previous = workspace.Deltas[l - 1];
                Array.Clear(previous);
                var weights = network.Parameters.AsSpan(offset, rows * columns);
                for (var j = 0; j < rows; j++)
                {
                    var d = current[j];
                    var row = weights.Slice(j * columns, columns);
                    for (var i = 0; i < columns; i++)
                    {
                        previous[i] += d * row[i];
                    }
                }

                // tanh′ = 1 − tanh².
                for (var i = 0; i < columns; i++)
                {
                    previous[i] *= 1 - (below[i] * below[i]);
                }
            }
        }

        return loss;
    }

    private static (double Loss, double Accuracy) Evaluate(
        FeedforwardNetwork network, double[] inputs, int[] classOf, int[] indices, int dimension, NetworkWorkspace workspace)
    {
        var loss = 0.0;
        var correct = 0;
        foreach (var index in indices)
        {
            var output = network.Forward(inputs.AsSpan(index * dimension, dimension), workspace);
            loss -= Math.Log(Math.Max(output[classOf[index]], 1e-300));
            var best = 0;
            for (var c = 1; c < output.Length; c++)
            {
                if (output[c] > output[best])
                {
                    best = c;
                }
            }

            correct += best == classOf[index] ? 1 : 0;
        }

        return (loss / indices.Length, (double)correct / indices.Length);
    }

    private static double[] Initialize(int[] sizes, SeededRandom random)
    {
        var parameters = new double[FeedforwardNetwork.ParameterCount(sizes)];
        var offset = 0;
        for (var l = 1; l < sizes.Length; l++)
        {
            // Glorot uniform: keeps activations and gradients at comparable scales across layers.
            var limit = Math.Sqrt(6.0 / (sizes[l] + sizes[l - 1]));
            for (var w = 0; w < sizes[l] * sizes[l - 1]; w++)
            {
                parameters[offset + w] = random.NextDouble(-limit, limit);
            }

            offset += (sizes[l] * sizes[l - 1]) + sizes[l];
        }

        return parameters;
    }

    private static void Shuffle(int[] values, SeededRandom random)
    {
        for (var i = values.Length - 1; i > 0; i--)
        {
            var j = random.NextInt(i + 1);
            (values[i], values[j]) = (values[j], values[i]);
        }
    }

    /// <summary>Adam's first and second moment estimates (Kingma &amp; Ba 2015).</summary>
    private sealed class AdamState(int count)
    {
        private const double Beta1 = 0.9;
        private const double Beta2 = 0.999;
        private const double Epsilon = 1e-8;
        private readonly double[] _first = new double[count];
        private readonly double[] _second = new double[count];
        private int _step;

        public void Step(double[] parameters, double[] gradient, double learningRate)
        {
            _step++;
            var correction1 = 1 - Math.Pow(Beta1, _step);
            var correction2 = 1 - Math.Pow(Beta2, _step);
            for (var p = 0; p < parameters.Length; p++)
            {
                _first[p] = (Beta1 * _first[p]) + ((1 - Beta1) * gradient[p]);
                _second[p] = (Beta2 * _second[p]) + ((1 - Beta2) * gradient[p] * gradient[p]);
                parameters[p] -= learningRate * (_first[p] / correction1) / (Math.Sqrt(_second[p] / correction2) + Epsilon);
            }
        }
    }
}
