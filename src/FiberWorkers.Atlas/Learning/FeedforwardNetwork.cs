using System.Numerics;

namespace FiberWorkers.Atlas.Learning;

/// <summary>
/// A fully connected feedforward classifier: tanh hidden layers and a softmax output over the labels present.
/// Inputs are box-normalized coordinates in [0, 1], mapped to u in [−1, 1] inside. Optionally the first layer sees
/// Fourier features of u instead of u itself (Tancik et al. 2020): sin(π·bⱼ·u) and cos(π·bⱼ·u) for fixed random
/// frequency vectors bⱼ, which let a small network draw the sharp, curved boundaries of a region map in a few
/// dimensions. Immutable once trained; queries need a caller-owned <see cref="NetworkWorkspace"/> (one per thread)
/// and allocate nothing.
/// </summary>
public sealed class FeedforwardNetwork
{
    /// <summary>Creates a network from its layer sizes (inputs, hidden…, outputs) and parameters.</summary>
    /// <param name="layerSizes">Sizes of every layer; the first is the input width (2m with m Fourier features).</param>
    /// <param name="parameters">Weights and biases.</param>
    /// <param name="labels">The label of each output.</param>
    /// <param name="frequencies">The m frequency vectors bⱼ, row-major (m × input dimension), or null for none.</param>
    public FeedforwardNetwork(int[] layerSizes, double[] parameters, int[] labels, double[]? frequencies = null)
    {
        ArgumentNullException.ThrowIfNull(layerSizes);
        ArgumentNullException.ThrowIfNull(parameters);
        ArgumentNullException.ThrowIfNull(labels);
        if (layerSizes.Length < 2 || layerSizes.Any(s => s < 1))
        {
            throw new ArgumentException("a network needs at least an input and an output layer", nameof(layerSizes));
        }

        if (frequencies is not null)
        {
            var features = layerSizes[0] / 2;
            if (layerSizes[0] % 2 != 0 || frequencies.Length == 0 || frequencies.Length % features != 0)
            {
                throw new ArgumentException(
                    $"{frequencies.Length} Fourier frequencies do not fill {features} features over an input of whole coordinates (input layer {layerSizes[0]})",
                    nameof(frequencies));
            }

            if (frequencies.Any(f => !double.IsFinite(f)))
            {
                throw new ArgumentException("a Fourier frequency is not a finite number", nameof(frequencies));
            }
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
        Frequencies = frequencies;
        InputDimension = frequencies is null ? layerSizes[0] : frequencies.Length / (layerSizes[0] / 2);
    }

    /// <summary>The Fourier features' frequency vectors (m × <see cref="InputDimension"/>, row-major), or null.</summary>
    public double[]? Frequencies { get; }

    /// <summary>Coordinates of a query point.</summary>
    public int InputDimension { get; }

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
        if (input.Length != InputDimension)
        {
            throw new ArgumentException($"the input has {input.Length} coordinates, the network {InputDimension}", nameof(input));
        }

        var first = workspace.Activations[0];
        if (Frequencies is { } frequencies)
        {
            var features = LayerSizes[0] / 2;
            for (var j = 0; j < features; j++)
            {
                var phase = 0.0;
                for (var k = 0; k < input.Length; k++)
                {
                    phase += frequencies[(j * input.Length) + k] * ((2 * input[k]) - 1);
                }

                phase *= Math.PI;
                first[j] = Math.Sin(phase);
                first[features + j] = Math.Cos(phase);
            }
        }
        else
        {
            for (var i = 0; i < input.Length; i++)
            {
                first[i] = (2 * input[i]) - 1;
            }
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
