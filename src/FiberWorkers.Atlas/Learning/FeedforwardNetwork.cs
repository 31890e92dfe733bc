using System.Numerics;

namespace FiberWorkers.Atlas.Learning;

/// <summary>
/// A fully connected feedforward classifier: tanh hidden layers and a softmax output over the labels present.
/// Inputs are box-normalized coordinates in [0, 1], mapped to [−1, 1] inside. Immutable once trained; queries need a
/// caller-owned <see cref="NetworkWorkspace"/> (one per thread) and allocate nothing.
/// </summary>
public sealed class FeedforwardNetwork
{
    /// <summary>Creates a network from its layer sizes (inputs, hidden…, outputs) and parameters.</summary>
    public FeedforwardNetwork(int[] layerSizes, double[] parameters, int[] labels)
    {
        ArgumentNullException.ThrowIfNull(layerSizes);
        ArgumentNullException.ThrowIfNull(parameters);
        ArgumentNullException.ThrowIfNull(labels);
        if (layerSizes.Length < 2 || layerSizes.Any(s => s < 1))
        {
            throw new ArgumentException("a network needs at least an input and an output layer", nameof(layerSizes));
        }

        if (parameters.Length != ParameterCount(layerSizes))
        {
            throw new ArgumentException($"{parameters.Length} parameters given, the layers need {ParameterCount(layerSizes)}", nameof(parameters));
        }

        if (labels.Length != layerSizes[^1])
        {
            throw new ArgumentException($"{labels.Length} labels for {layerSizes[^1]} outputs", nameof(labels));
        }

        LayerSizes = layerSizes;
        Parameters = parameters;
        Labels = labels;
    }

    /// <summary>Sizes of every layer: inputs, hidden layers, outputs.</summary>
    public int[] LayerSizes { get; }

    /// <summary>All weights and biases: per layer the weights (outputs × inputs, row-major) then the biases.</summary>
    public double[] Parameters { get; }

    /// <summary>The label (real count) of each output.</summary>
    public int[] Labels { get; }

    /// <summary>The number of weights and biases of a network with these layers.</summary>
    public static int ParameterCount(int[] layerSizes)
    {
        var count = 0;
        for (var l = 1; l < layerSizes.Length; l++)
        {
            count += (layerSizes[l] * layerSizes[l - 1]) + layerSizes[l];
        }

        return count;
    }

    /// <summary>A workspace sized for this network.</summary>
    public NetworkWorkspace CreateWorkspace() => new(LayerSizes);

    /// <summary>The most probable label at <paramref name="input"/> (normalized coordinates).</summary>
    public int Classify(ReadOnlySpan<double> input, NetworkWorkspace workspace)
    {
        var output = Forward(input, workspace);
        var best = 0;
        for (var c = 1; c < output.Length; c++)
        {
            if (output[c] > output[best])
            {
                best = c;
            }
        }

        return Labels[best];
    }

    /// <summary>Class probabilities at <paramref name="input"/>, in output order (see <see cref="Labels"/>).</summary>
    public ReadOnlySpan<double> Probabilities(ReadOnlySpan<double> input, NetworkWorkspace workspace) => Forward(input, workspace);

    /// <summary>Runs the layers, leaving every activation in the workspace; returns the softmax output.</summary>
    internal ReadOnlySpan<double> Forward(ReadOnlySpan<double> input, NetworkWorkspace workspace)
    {
        if (input.Length != LayerSizes[0])
        {
            throw new ArgumentException($"the input has {input.Length} coordinates, the network {LayerSizes[0]}", nameof(input));
        }

        var first = workspace.Activations[0];
        for (var i = 0; i < input.Length; i++)
        {
            first[i] = (2 * input[i]) - 1;
        }

        var offset = 0;
        for (var l = 1; l < LayerSizes.Length; l++)
        {
            var inputs = workspace.Activations[l - 1].AsSpan();
            var outputs = workspace.Activations[l].AsSpan();
            var (rows, columns) = (LayerSizes[l], LayerSizes[l - 1]);
            var weights = Parameters.AsSpan(offset, rows * columns);
            var biases = Parameters.AsSpan(offset + (rows * columns), rows);
            for (var j = 0; j < rows; j++)
            {
                outputs[j] = biases[j] + Dot(weights.Slice(j * columns, columns), inputs);
            }

            if (l < LayerSizes.Length - 1)
            {
                for (var j = 0; j < rows; j++)
                {
                    outputs[j] = Math.Tanh(outputs[j]);
                }
            }

            offset += (rows * columns) + rows;
        }

        Softmax(workspace.Activations[^1]);
        return workspace.Activations[^1];
    }

    internal static double Dot(ReadOnlySpan<double> a, ReadOnlySpan<double> b)
    {
        var sum = 0.0;
        var i = 0;
        if (Vector.IsHardwareAccelerated && a.Length >= Vector<double>.Count)
        {
            var acc = Vector<double>.Zero;
            for (; i <= a.Length - Vector<double>.Count; i += Vector<double>.Count)
            {
                acc += new Vector<double>(a[i..]) * new Vector<double>(b[i..]);
            }

            sum = Vector.Sum(acc);
        }

        for (; i < a.Length; i++)
        {
            sum += a[i] * b[i];
        }

        return sum;
    }

    private static void Softmax(Span<double> values)
    {
        var max = double.NegativeInfinity;
        foreach (var v in values)
        {
            max = Math.Max(max, v);
        }

        var total = 0.0;
        for (var i = 0; i < values.Length; i++)
        {
            values[i] = Math.Exp(values[i] - max);
            total += values[i];
        }

        for (var i = 0; i < values.Length; i++)
        {
            values[i] /= total;
        }
    }
}

/// <summary>Scratch activations for one network; one per thread.</summary>
public sealed class NetworkWorkspace
{
    internal NetworkWorkspace(int[] layerSizes)
    {
        Activations = [.. layerSizes.Select(s => new double[s])];
        Deltas = [.. layerSizes.Select(s => new double[s])];
    }

    internal double[][] Activations { get; }

    internal double[][] Deltas { get; }
}
