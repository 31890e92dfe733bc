using System.Text.Json;

namespace FiberWorkers.Cli.Tests.Commands;

public sealed class LearnAndLabelCommandTests : IDisposable
{
    private readonly string _folder = Path.Combine(Path.GetTempPath(), $"fiber-learn-{Guid.NewGuid():N}");

    public LearnAndLabelCommandTests() => Directory.CreateDirectory(_folder);

    public void Dispose() => Directory.Delete(_folder, recursive: true);

    [Fact]
    public async Task Learn_stores_a_network_that_label_then_uses()
    {
        var atlas = await ReactionAtlas();
        var (code, output, error) = await CliRunner.RunAsync("learn", atlas, "--model", "net", "--layers", "16,16", "--epochs", "40", "--json");
        Assert.True(code == 0, error);
        using (var json = JsonDocument.Parse(output))
        {
            var root = json.RootElement;
            Assert.Equal("net", root.GetProperty("model").GetString());
            Assert.Equal(2, root.GetProperty("atlasVersion").GetInt32());
            Assert.InRange(root.GetProperty("accuracy").GetDouble(), 0.8, 1.0);
            var confusion = root.GetProperty("confusion");
            var total = confusion.EnumerateObject().Sum(row => row.Value.EnumerateObject().Sum(cell => cell.Value.GetInt64()));
            Assert.Equal(root.GetProperty("validationSamples").GetInt32(), total);
        }

        // Inside the bistable wedge (decay 2, feed 0.1: three positive steady states, by the cubic's discriminant
        // after x = y + 1: y³ + (decay − 3)y + (decay − 2 − feed)) and outside it.
        foreach (var (at, expected) in new[] { ("decay=2,feed=0.1", 3), ("decay=3.3,feed=1.4", 1) })
        {
            var (labelCode, label, labelError) = await CliRunner.RunAsync("label", atlas, "--at", at, "--model", "net", "--json");
            Assert.True(labelCode == 0, labelError);
            using var json = JsonDocument.Parse(label);
            Assert.Equal(expected, json.RootElement.GetProperty("label").GetInt32());
            Assert.Equal("net", json.RootElement.GetProperty("model").GetString());
            Assert.True(json.RootElement.GetProperty("distance").GetDouble() >= 0);
            Assert.Equal(2, json.RootElement.GetProperty("nearest").EnumerateObject().Count());
        }
    }

    [Fact]
    public async Task Label_with_a_network_that_was_never_trained_is_an_input_error()
    {
        var atlas = await ReactionAtlas();
        var (code, _, error) = await CliRunner.RunAsync("label", atlas, "--at", "decay=2,feed=0.1", "--model", "net");
        Assert.Equal(1, code);
        Assert.Contains("no network is stored", error, StringComparison.Ordinal);
    }

    [Theory]
    [InlineData("--layers", "0,5")]
    [InlineData("--layers", "a")]
    [InlineData("--holdout", "0.95")]
    [InlineData("--k", "0")]
    [InlineData("--fourier", "-1")]
    [InlineData("--fourier", "2000")]
    [InlineData("--fourier-scale", "0")]
    public async Task Bad_learning_options_are_usage_errors(string option, string value)
    {
        var atlas = await ReactionAtlas();
        var (code, _, _) = await CliRunner.RunAsync("learn", atlas, "--model", "knn", option, value);
        Assert.Equal(2, code);
    }

    private async Task<string> ReactionAtlas()
    {
        var path = Path.Combine(_folder, "switch.db");
        if (!File.Exists(path))
        {
            var (code, _, error) = await CliRunner.RunAsync("sweep", "--example", "reaction-switch", "--atlas", path, "--tiles", "5x5", "--lines", "8");
            Assert.True(code == 0, error);
        }

        return path;
    }
}
