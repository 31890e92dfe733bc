using System.CommandLine;
using System.Globalization;
using FiberWorkers.Algebra.Families;
using FiberWorkers.Cluster.Contracts;
using FiberWorkers.Cluster.Coordination;

namespace FiberWorkers.Cli.Commands;

/// <summary>
/// The request-limit options of <c>fiber serve coordinator|worker</c> (<see cref="RequestLimits"/> and the message
/// size): each option is named as the limit is named in refusals, defaults to the library's default, and is checked
/// against a range (read by the deploy manifest test from the <c>Range(...)</c> calls here). The rate and concurrency
/// limits are the coordinator's only.
/// </summary>
internal sealed class ServeLimits
{
    private readonly Option<int> _maxMessageBytes = new("--max-message-bytes")
    {
        Description = "Largest gRPC message accepted or sent, in bytes; larger requests are refused (ResourceExhausted).",
        DefaultValueFactory = _ => CoordinatorOptions.Default.MaxMessageBytes,
    };

    private readonly Option<int> _maxFamilyBytes = new("--max-family-bytes")
    {
        Description = "Largest family JSON a request may carry, in bytes.",
        DefaultValueFactory = _ => FamilyLimits.Default.MaxFileBytes,
    };

    private readonly Option<int> _maxUnknowns = new("--max-unknowns")
    {
        Description = "Most unknowns (and equations) of a family.",
        DefaultValueFactory = _ => FamilyLimits.Default.MaxUnknowns,
    };

    private readonly Option<int> _maxParameters = new("--max-parameters")
    {
        Description = "Most parameters of a family (and values of an asked point).",
        DefaultValueFactory = _ => FamilyLimits.Default.MaxParameters,
    };

    private readonly Option<int> _maxDegree = new("--max-degree")
    {
        Description = "Highest total degree of an equation, in the unknowns and in the parameters.",
        DefaultValueFactory = _ => FamilyLimits.Default.MaxDegree,
    };

    private readonly Option<int> _maxExpressionNodes = new("--max-expression-nodes")
    {
        Description = "Most expression nodes (numbers, names, operators) in one equation.",
        DefaultValueFactory = _ => FamilyLimits.Default.MaxExpressionNodes,
    };

    private readonly Option<long> _maxPaths = new("--max-paths")
    {
        Description = "Most paths one solve may track: a family's Bézout number (total degree) or root count, a start fiber's solutions.",
        DefaultValueFactory = _ => RequestLimits.Default.MaxPaths,
    };

    private readonly Option<long> _maxTiles = new("--max-tiles-per-sweep")
    {
        Description = "Most tiles a sweep may plan, level 0 and what refinement may add.",
        DefaultValueFactory = _ => RequestLimits.Default.MaxTilesPerSweep,
    };

    private readonly Option<long> _maxSamples = new("--max-samples-per-sweep")
    {
        Description = "Most samples a sweep may plan (tiles x lines x 2 at least) and largest sample budget.",
        DefaultValueFactory = _ => RequestLimits.Default.MaxSamplesPerSweep,
    };

    private readonly Option<int> _maxSweeps = new("--max-concurrent-sweeps")
    {
        Description = "Sweeps one caller (token, or peer without tokens) may have running at once.",
        DefaultValueFactory = _ => RequestLimits.Default.MaxConcurrentSweeps,
    };

    private readonly Option<double> _queryRate = new("--query-rate")
    {
        Description = "Queries (ask, list versions, fetch shard) per second one caller may make on average.",
        DefaultValueFactory = _ => RequestLimits.Default.QueryRate,
    };

    private readonly Option<int> _queryBurst = new("--query-burst")
    {
        Description = "Queries one caller may make at once after being idle.",
        DefaultValueFactory = _ => RequestLimits.Default.QueryBurst,
    };

    private readonly bool _coordinator;

    private ServeLimits(bool coordinator) => _coordinator = coordinator;

    public static ServeLimits ForCoordinator() => new(coordinator: true);

    public static ServeLimits ForWorker() => new(coordinator: false);

    /// <summary>Adds the options to <paramref name="command"/>.</summary>
    public void AddTo(Command command)
    {
        ArgumentNullException.ThrowIfNull(command);
        Option[] shared = [_maxMessageBytes, _maxFamilyBytes, _maxUnknowns, _maxParameters, _maxDegree, _maxExpressionNodes, _maxPaths, _maxTiles, _maxSamples];
        foreach (var option in _coordinator ? [.. shared, _maxSweeps, _queryRate, _queryBurst] : shared)
        {
            command.Options.Add(option);
        }
    }

    /// <summary>The limits and message size given; <see cref="UsageException"/> naming the option when one is out of range.</summary>
    public (RequestLimits Limits, int MaxMessageBytes) Read(ParseResult parse)
    {
        ArgumentNullException.ThrowIfNull(parse);
        var messageBytes = Range(parse.GetValue(_maxMessageBytes), 1024, 1_073_741_824, "--max-message-bytes");
        var family = FamilyLimits.Default with
        {
            MaxFileBytes = Range(parse.GetValue(_maxFamilyBytes), 64, 1_073_741_824, "--max-family-bytes"),
            MaxUnknowns = Range(parse.GetValue(_maxUnknowns), 1, 1000, "--max-unknowns"),
            MaxParameters = Range(parse.GetValue(_maxParameters), 1, 64, "--max-parameters"),
            MaxDegree = Range(parse.GetValue(_maxDegree), 1, 1000, "--max-degree"),
            MaxExpressionNodes = Range(parse.GetValue(_maxExpressionNodes), 1, 10_000_000, "--max-expression-nodes"),
        };
        if (family.MaxFileBytes > messageBytes)
        {
            throw new UsageException($"--max-family-bytes {family.MaxFileBytes} exceeds --max-message-bytes {messageBytes}: a family travels inside one message");
        }

        var limits = RequestLimits.Default with
        {
            Family = family,
            MaxPaths = Range(parse.GetValue(_maxPaths), 1, 100_000_000, "--max-paths"),
            MaxTilesPerSweep = Range(parse.GetValue(_maxTiles), 1, 100_000_000, "--max-tiles-per-sweep"),
            MaxSamplesPerSweep = Range(parse.GetValue(_maxSamples), 1, 10_000_000_000, "--max-samples-per-sweep"),
        };
        if (_coordinator)
        {
            limits = limits with
            {
                MaxConcurrentSweeps = Range(parse.GetValue(_maxSweeps), 1, 1000, "--max-concurrent-sweeps"),
                QueryRate = Range(parse.GetValue(_queryRate), 0.001, 1_000_000, "--query-rate"),
                QueryBurst = Range(parse.GetValue(_queryBurst), 1, 1_000_000, "--query-burst"),
            };
        }

        return (limits, messageBytes);
    }

    private static int Range(int value, int low, int high, string option) =>
        value >= low && value <= high ? value : throw new UsageException($"{option} must be between {low} and {high}, got {value}");

    private static long Range(long value, long low, long high, string option) =>
        value >= low && value <= high ? value : throw new UsageException($"{option} must be between {low} and {high}, got {value}");

    private static double Range(double value, double low, double high, string option) =>
        value >= low && value <= high
            ? value
            : throw new UsageException(string.Create(CultureInfo.InvariantCulture, $"{option} must be between {low} and {high} per second, got {value}"));
}
