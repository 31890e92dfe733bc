using FiberWorkers.Atlas.Learning;

namespace FiberWorkers.Atlas.Tests.Learning;

public sealed class FeedforwardNetworkTests
{
    [Fact]
    public void Backpropagated_gradients_match_central_finite_differences()
    {
        var random = new Random(3);
        int[] sizes = [3, 5, 4, 3];
        var parameters = Enumerable.Range(0, FeedforwardNetwork.ParameterCount(sizes)).Select(_ => random.NextDouble() - 0.5).ToArray();
        var network = new FeedforwardNetwork(sizes, parameters, [0, 2, 4]);
        AssertGradientsMatchFiniteDifferences(network, parameters, [0.2, 0.7, 0.4], target: 1);
    }

    [Fact]
    public void The_network_learns_the_sign_of_the_cubic_discriminant_from_exact_labels()
    {
        // x³ + bx + c has three real roots where 4b³ + 27c² < 0, one where it is positive (any algebra text).
        var random = new Random(11);
        var (inputs, labels) = CubicSamples(random, 6000);
        var (network, history) = NetworkTrainer.Train(inputs, labels, 2, new NetworkOptions { Hidden = [32, 32], Epochs = 150, Seed = 4 });
        Assert.True(history.Count >= 10);
        var (test, truth) = CubicSamples(random, 10_000);
        AssertAccuracyAtLeast(network, test, truth, 0.995);
    }

    [Fact]
    public void Training_is_deterministic_for_a_seed_on_any_number_of_threads()
    {
        var (inputs, labels) = CubicSamples(new Random(2), 800);
        var one = NetworkTrainer.Train(inputs, labels, 2, new NetworkOptions { Hidden = [8], Epochs = 20, Seed = 9, Threads = 1 }).Network;
        var two = NetworkTrainer.Train(inputs, labels, 2, new NetworkOptions { Hidden = [8], Epochs = 20, Seed = 9, Threads = 2 }).Network;
        var other = NetworkTrainer.Train(inputs, labels, 2, new NetworkOptions { Hidden = [8], Epochs = 20, Seed = 10, Threads = 2 }).Network;
        Assert.Equal(one.Parameters, two.Parameters);
        Assert.NotEqual(one.Parameters, other.Parameters);
    }

    [Fact]
    public void A_stored_network_reads_back_identically_and_damaged_ones_are_refused()
    {
        var (inputs, labels) = CubicSamples(new Random(6), 300);
        var network = NetworkTrainer.Train(inputs, labels, 2, new NetworkOptions { Hidden = [6], Epochs = 5 }).Network;
        var box = new[] { new Algebra.Families.ParameterBox("b", -3, 1), new Algebra.Families.ParameterBox("c", -2, 2) };
        var model = new NetworkClassifier(network).ToModel(box, 1);
        var again = NetworkClassifier.FromModel(Contracts.V1.ClassifierModel.Parser.ParseFrom(Google.Protobuf.MessageExtensions.ToByteArray(model)), "test");
        Assert.Equal(network.Parameters, again.Network.Parameters);
        model.Parameters.RemoveAt(0);
        Assert.Throws<Algebra.Families.InputException>(() => NetworkClassifier.FromModel(model, "test"));
        model.FormatVersion = 99;
        var error = Assert.Throws<Algebra.Families.InputException>(() => NetworkClassifier.FromModel(model, "test"));
        Assert.Contains("format version 99", error.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void Gradients_through_Fourier_features_match_central_finite_differences()
    {
        // The features are fixed; backpropagation must still be exact for every weight behind them.
        var random = new Random(8);
        int[] sizes = [8, 5, 3];
        var frequencies = Enumerable.Range(0, 4 * 3).Select(_ => random.NextDouble() - 0.5).ToArray();
        var parameters = Enumerable.Range(0, FeedforwardNetwork.ParameterCount(sizes)).Select(_ => random.NextDouble() - 0.5).ToArray();
        var network = new FeedforwardNetwork(sizes, parameters, [0, 2, 4], frequencies);
        Assert.Equal(3, network.InputDimension);
        AssertGradientsMatchFiniteDifferences(network, parameters, [0.2, 0.7, 0.4], target: 2);
    }

    [Fact]
    public void With_Fourier_features_the_network_learns_the_cubic_discriminant_sign_and_is_deterministic()
    {
        // Same rule as above (4b³ + 27c² < 0: three real roots), through 16 random frequency vectors.
        var random = new Random(12);
        var (inputs, labels) = CubicSamples(random, 6000);
        var options = new NetworkOptions { Hidden = [32, 32], Epochs = 150, Seed = 4, FourierFeatures = 16, FourierScale = 0.5 };
        var (network, _) = NetworkTrainer.Train(inputs, labels, 2, options);
        Assert.Equal(32, network.LayerSizes[0]);
        Assert.Equal(2, network.InputDimension);
        var (test, truth) = CubicSamples(random, 10_000);
        AssertAccuracyAtLeast(network, test, truth, 0.995);
        var (small, smallLabels) = CubicSamples(new Random(2), 400);
        var quick = options with { Hidden = [8], Epochs = 10 };
        var one = NetworkTrainer.Train(small, smallLabels, 2, quick with { Threads = 1 }).Network;
        var two = NetworkTrainer.Train(small, smallLabels, 2, quick with { Threads = 2 }).Network;
        Assert.Equal(one.Frequencies, two.Frequencies);
        Assert.Equal(one.Parameters, two.Parameters);
    }

    [Fact]
    public void A_stored_network_with_Fourier_features_reads_back_as_format_2_and_inconsistent_ones_are_refused()
    {
        var (inputs, labels) = CubicSamples(new Random(7), 300);
        var network = NetworkTrainer.Train(inputs, labels, 2, new NetworkOptions { Hidden = [6], Epochs = 5, FourierFeatures = 5 }).Network;
        var box = new[] { new Algebra.Families.ParameterBox("b", -3, 1), new Algebra.Families.ParameterBox("c", -2, 2) };
        var model = new NetworkClassifier(network).ToModel(box, 1);
        Assert.Equal(2u, model.FormatVersion);
        var again = NetworkClassifier.FromModel(Contracts.V1.ClassifierModel.Parser.ParseFrom(Google.Protobuf.MessageExtensions.ToByteArray(model)), "test");
        Assert.Equal(network.Frequencies, again.Network.Frequencies);
        Assert.Equal(network.Parameters, again.Network.Parameters);
        double[] point = [0.3, 0.6];
        Assert.Equal(network.Classify(point, network.CreateWorkspace()), again.Classify(point));

        // A plain network stays format 1, which this build still reads.
        var plain = new NetworkClassifier(NetworkTrainer.Train(inputs, labels, 2, new NetworkOptions { Hidden = [6], Epochs = 5 }).Network).ToModel(box, 1);
        Assert.Equal(1u, plain.FormatVersion);
        Assert.Null(NetworkClassifier.FromModel(plain, "test").Network.Frequencies);

        var lost = model.Clone();
        lost.FourierFrequencies.Clear();
        Assert.Contains("Fourier frequencies", Assert.Throws<Algebra.Families.InputException>(() => NetworkClassifier.FromModel(lost, "test")).Message, StringComparison.Ordinal);
        var short1 = model.Clone();
        short1.FourierFrequencies.RemoveAt(0);
        Assert.Throws<Algebra.Families.InputException>(() => NetworkClassifier.FromModel(short1, "test"));
        var wrongBox = model.Clone();
        wrongBox.Low.Add(0);
        wrongBox.High.Add(1);
        Assert.Contains("a box of 3", Assert.Throws<Algebra.Families.InputException>(() => NetworkClassifier.FromModel(wrongBox, "test")).Message, StringComparison.Ordinal);
        var notFinite = model.Clone();
        notFinite.FourierFrequencies[0] = double.NaN;
        Assert.Throws<Algebra.Families.InputException>(() => NetworkClassifier.FromModel(notFinite, "test"));
    }

    /// <summary>Backpropagation against central finite differences of the cross-entropy, for every parameter.</summary>
    private static void AssertGradientsMatchFiniteDifferences(FeedforwardNetwork network, double[] parameters, double[] input, int target)
    {
        var workspace = network.CreateWorkspace();
        var gradient = new double[parameters.Length];
        NetworkTrainer.Backpropagate(network, input, target, workspace, gradient);
        const double h = 1e-6;
        for (var p = 0; p < parameters.Length; p++)
        {
            var saved = parameters[p];
            parameters[p] = saved + h;
            var plus = -Math.Log(network.Probabilities(input, workspace)[target]);
            parameters[p] = saved - h;
            var minus = -Math.Log(network.Probabilities(input, workspace)[target]);
            parameters[p] = saved;
            var numeric = (plus - minus) / (2 * h);
            Assert.True(Math.Abs(numeric - gradient[p]) <= 1e-7 + (1e-5 * Math.Abs(numeric)), $"parameter {p}: backpropagation {gradient[p]}, finite difference {numeric}");
        }
    }

    private static void AssertAccuracyAtLeast(FeedforwardNetwork network, double[] test, int[] truth, double share)
    {
        var workspace = network.CreateWorkspace();
        var correct = 0;
        for (var i = 0; i < truth.Length; i++)
        {
            correct += network.Classify(test.AsSpan(2 * i, 2), workspace) == truth[i] ? 1 : 0;
        }

        Assert.True(correct >= share * truth.Length, $"accuracy {(double)correct / truth.Length:P2}");
    }

    private static (double[] Inputs, int[] Labels) CubicSamples(Random random, int count)
    {
        var inputs = new double[2 * count];
        var labels = new int[count];
        for (var i = 0; i < count; i++)
        {
            var (u, v) = (random.NextDouble(), random.NextDouble());
            var (b, c) = (-3 + (4 * u), -2 + (4 * v));
            inputs[2 * i] = u;
            inputs[(2 * i) + 1] = v;
            labels[i] = (4 * b * b * b) + (27 * c * c) < 0 ? 3 : 1;
        }

        return (inputs, labels);
    }
}
