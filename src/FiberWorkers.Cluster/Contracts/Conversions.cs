using System.Globalization;
using FiberWorkers.Atlas.Resolve;
using FiberWorkers.Atlas.Stores;
using FiberWorkers.Atlas.Sweeps;
using FiberWorkers.Contracts.V1;
using FiberWorkers.Solving.StartFibers;

namespace FiberWorkers.Cluster.Contracts;

/// <summary>Conversions between the cluster contract's messages and the atlas layer's options and results.</summary>
public static class Conversions
{
    /// <summary>The contract's settings for sweep options (thread counts are not part of them).</summary>
    public static SweepSettings ToSettings(SweepOptions options)
    {
        ArgumentNullException.ThrowIfNull(options);
        var settings = new SweepSettings
        {
            LinesPerTile = options.LinesPerTile,
            Seed = options.Seed,
            DeltaFraction = options.DeltaFraction,
            RefineDepth = options.RefineDepth,
            SampleBudget = options.SampleBudget ?? 0,
            StartMethod = MethodName(options.StartMethod),
        };
        settings.Divisions.Add(options.Divisions);
        return settings;
    }

    /// <summary>
    /// Sweep options from the contract's settings; throws <see cref="ArgumentException"/> naming the field when a
    /// value is out of range for a family with <paramref name="parameterCount"/> parameters.
    /// </summary>
    public static SweepOptions ToOptions(SweepSettings settings, int parameterCount, int threads = 1)
    {
        ArgumentNullException.ThrowIfNull(settings);
        if (settings.SampleBudget < 0)
        {
            throw new ArgumentException($"settings.sample_budget must be 0 (no limit) or positive, got {settings.SampleBudget}");
        }

        var method = settings.StartMethod switch
        {
            "" or "auto" => StartFiberMethod.Auto,
            "total-degree" => StartFiberMethod.TotalDegree,
            "monodromy" => StartFiberMethod.Monodromy,
            var other => throw new ArgumentException($"settings.start_method must be auto, total-degree or monodromy, got '{other}'"),
        };
        var options = new SweepOptions
        {
            Divisions = [.. settings.Divisions],
            LinesPerTile = settings.LinesPerTile,
            Seed = settings.Seed,
            DeltaFraction = settings.DeltaFraction,
            RefineDepth = settings.RefineDepth,
            SampleBudget = settings.SampleBudget > 0 ? settings.SampleBudget : null,
            StartMethod = method,
            MaxDegreeOfParallelism = Math.Max(1, threads),
        };
        try
        {
            options.Validate(parameterCount);
        }
        catch (ArgumentException e)
        {
            throw new ArgumentException($"settings: {e.Message}", e);
        }

        return options;
    }

    /// <summary>The name used on command lines and in the contract.</summary>
    public static string MethodName(StartFiberMethod method) => method switch
    {
        StartFiberMethod.TotalDegree => "total-degree",
        StartFiberMethod.Monodromy => "monodromy",
        _ => "auto",
    };

    public static SweepOutcome ToOutcome(SweepSummary summary, long sweepId)
    {
        ArgumentNullException.ThrowIfNull(summary);
        var outcome = new SweepOutcome
        {
            AtlasId = summary.AtlasId,
            AtlasVersion = summary.AtlasVersion,
            Tiles = summary.Tiles,
            Samples = summary.Samples,
            Crossings = summary.Crossings,
            Flags = summary.Flags,
            ContentHash = summary.ContentHash,
            TilesComputed = summary.TilesComputed,
            PathsTracked = summary.PathsTracked,
            ElapsedSeconds = summary.Elapsed.TotalSeconds,
            SweepId = sweepId,
        };
        foreach (var (label, count) in summary.Labels)
        {
            outcome.Labels[label] = count;
        }

        foreach (var (kind, count) in summary.Kinds)
        {
            outcome.Kinds[kind] = count;
        }

        outcome.StartFibers.Add(summary.StartFibers);
        return outcome;
    }

    public static SweepSummary ToSummary(SweepOutcome outcome)
    {
        ArgumentNullException.ThrowIfNull(outcome);
        return new SweepSummary
        {
            AtlasId = outcome.AtlasId,
            AtlasVersion = outcome.AtlasVersion,
            Tiles = outcome.Tiles,
            Samples = outcome.Samples,
            Crossings = outcome.Crossings,
            Labels = new SortedDictionary<int, long>(outcome.Labels),
            Kinds = new SortedDictionary<string, long>(outcome.Kinds, StringComparer.Ordinal),
            Flags = outcome.Flags,
            ContentHash = outcome.ContentHash,
            TilesComputed = outcome.TilesComputed,
            PathsTracked = outcome.PathsTracked,
            Elapsed = TimeSpan.FromSeconds(outcome.ElapsedSeconds),
            StartFibers = [.. outcome.StartFibers],
        };
    }

    public static AtlasVersion ToMessage(string atlasId, string familyName, AtlasVersionInfo info)
    {
        ArgumentNullException.ThrowIfNull(info);
        return new AtlasVersion
        {
            AtlasId = atlasId,
            Version = info.Version,
            Parent = info.Parent ?? 0,
            Kind = info.Kind,
            Created = info.Created.UtcDateTime.ToString("O", CultureInfo.InvariantCulture),
            Options = info.Options,
            ContentHash = info.ContentHash,
            SummaryJson = info.Summary,
            FamilyName = familyName,
        };
    }

    public static AtlasVersionInfo ToInfo(AtlasVersion message)
    {
        ArgumentNullException.ThrowIfNull(message);
        return new AtlasVersionInfo(
            message.Version,
            message.Parent == 0 ? null : message.Parent,
            message.Kind,
            DateTimeOffset.Parse(message.Created, CultureInfo.InvariantCulture, DateTimeStyles.RoundtripKind),
            message.Options,
            message.ContentHash,
            message.SummaryJson);
    }

    public static AskReply ToReply(ResolveAnswer answer, string requestId, string atlasId, string workerId, string tileKey)
    {
        ArgumentNullException.ThrowIfNull(answer);
        var reply = new AskReply
        {
            RequestId = requestId,
            AtlasId = atlasId,
            AtlasVersion = answer.AtlasVersion,
            Method = answer.Method,
            RealCount = answer.RealCount,
            Certified = answer.Certified,
            PredictedLabel = answer.PredictedLabel,
            OutsideBox = answer.OutsideBox,
            StartSample = answer.StartSample ?? string.Empty,
            PathsTracked = answer.PathsTracked,
            WorkerId = workerId,
            TileKey = tileKey,
        };
        if (answer.Verified is { } verified)
        {
            reply.Verified = verified;
        }

        reply.Rejections.Add(answer.Rejections);
        foreach (var solution in answer.Solutions)
        {
            var real = new RealSolution { Certified = solution.Certified };
            real.Values.Add(solution.Values.Select(v => v.Real));
            reply.Solutions.Add(real);
        }

        return reply;
    }
}
