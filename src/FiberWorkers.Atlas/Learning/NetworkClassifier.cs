using FiberWorkers.Contracts.V1;

namespace FiberWorkers.Atlas.Learning;

/// <summary>A trained <see cref="FeedforwardNetwork"/> as a region classifier, and its stored form.</summary>
public sealed class NetworkClassifier : RegionClassifier
{
    /// <summary>The newest model format this build writes and reads (1 for plain inputs, 2 with Fourier features).</summary>
    public const uint FormatVersion = 2;

    private readonly ThreadLocal<NetworkWorkspace> _workspaces;

    public NetworkClassifier(FeedforwardNetwork network, string training = "")
    {
        ArgumentNullException.ThrowIfNull(network);
        Network = network;
        Training = training;
        _workspaces = new ThreadLocal<NetworkWorkspace>(network.CreateWorkspace);
    }

    /// <inheritdoc />
    public override string Name => "net";

    /// <summary>The network.</summary>
    public FeedforwardNetwork Network { get; }

    /// <summary>How it was trained, for people.</summary>
    public string Training { get; }

    /// <inheritdoc />
    public override int Classify(ReadOnlySpan<double> normalized) => Network.Classify(normalized, _workspaces.Value!);

    /// <summary>The stored form.</summary>
    public ClassifierModel ToModel(IReadOnlyList<Algebra.Families.ParameterBox> box, int trainedOnVersion)
    {
        var model = new ClassifierModel
        {
            FormatVersion = Network.Frequencies is null ? 1 : FormatVersion,
            Kind = "net",
            Activation = "tanh",
            TrainedOnVersion = trainedOnVersion,
            Training = Training,
        };
        model.Labels.Add(Network.Labels);
        model.Low.Add(box.Select(b => b.Low));
        model.High.Add(box.Select(b => b.High));
        model.LayerSizes.Add(Network.LayerSizes);
        model.Parameters.Add(Network.Parameters);
        if (Network.Frequencies is { } frequencies)
        {
            model.FourierFrequencies.Add(frequencies);
        }

        return model;
    }

    /// <summary>Reads a stored network; refuses unknown versions, kinds and inconsistent shapes.</summary>
    public static NetworkClassifier FromModel(ClassifierModel model, string source)
    {
        ArgumentNullException.ThrowIfNull(model);
        if (model.FormatVersion is < 1 or > FormatVersion)
        {
            throw new Algebra.Families.InputException(source, "model", $"format version {model.FormatVersion} is not known to this build (reads 1 to {FormatVersion})");
        }

        if ((model.FormatVersion >= 2) != (model.FourierFrequencies.Count > 0))
        {
            throw new Algebra.Families.InputException(
                source, "model", $"format version {model.FormatVersion} with {model.FourierFrequencies.Count} Fourier frequencies (version 2 has them, version 1 not)");
        }

        if (model.Kind != "net" || model.Activation != "tanh")
        {
            throw new Algebra.Families.InputException(source, "model", $"not a tanh network (kind '{model.Kind}', activation '{model.Activation}')");
        }

        try
        {
            var frequencies = model.FourierFrequencies.Count > 0 ? model.FourierFrequencies.ToArray() : null;
            var network = new FeedforwardNetwork([.. model.LayerSizes], [.. model.Parameters], [.. model.Labels], frequencies);
            if (network.InputDimension != model.Low.Count || model.High.Count != model.Low.Count)
            {
                throw new ArgumentException($"inputs of {network.InputDimension} coordinates, a box of {model.Low.Count}");
            }

            return new NetworkClassifier(network, model.Training);
        }
        catch (ArgumentException e)
        {
            throw new Algebra.Families.InputException(source, "model", $"damaged network ({e.Message})");
        }
    }
}
