using System.Globalization;
using System.Numerics;
using System.Text;
using FiberWorkers.Algebra.Families;
using FiberWorkers.Atlas.Sweeps;
using FiberWorkers.Atlas.Tiles;
using FiberWorkers.Contracts.V1;
using FiberWorkers.Solving.StartFibers;
using Grpc.Core;

namespace FiberWorkers.Cluster.Contracts;

/// <summary>
/// Checks of every request field a service reads, before it is used. A failure is an
/// <see cref="RpcException"/> with <see cref="StatusCode.InvalidArgument"/> whose detail names the field and what is
/// wrong with it ("ask.point: 2 values given, the family has 3 parameters").
/// </summary>
public static class RequestChecks
{
    /// <summary>Longest identifier accepted (atlas ids, worker ids, request ids, tile keys).</summary>
    public const int MaxIdLength = 200;

    public static RpcException Invalid(string field, string what) => new(new Status(StatusCode.InvalidArgument, $"{field}: {what}"));

    public static void Id(string value, string field, bool required = true)
    {
        if (required && string.IsNullOrEmpty(value))
        {
            throw Invalid(field, "is required");
        }

        if (value.Length > MaxIdLength)
        {
            throw Invalid(field, $"is {value.Length} characters long; at most {MaxIdLength} are accepted");
        }

        if (value.Any(char.IsControl))
        {
            throw Invalid(field, "contains control characters");
        }
    }

    public static void Version(int version, string field)
    {
        if (version < 0)
        {
            throw Invalid(field, $"must be 0 (latest) or a version number, got {version}");
        }
    }

    public static TileKey Tile(string text, string field)
    {
        Id(text, field);
        try
        {
            return TileKey.Parse(text);
        }
        catch (FormatException e)
        {
            throw Invalid(field, e.Message);
        }
    }

    public static TileKey RootTile(string text, string field)
    {
        var key = Tile(text, field);
        return key.Level == 0 ? key : throw Invalid(field, $"'{text}' is a level-{key.Level} tile; shards and routes use level-0 tiles");
    }

    /// <summary>A point of <paramref name="parameters"/> finite values.</summary>
    public static double[] Point(IReadOnlyList<double> point, int parameters, string field)
    {
        if (point.Count != parameters)
        {
            throw Invalid(field, $"{point.Count} values given, the family has {parameters} parameters");
        }

        for (var k = 0; k < point.Count; k++)
        {
            if (!double.IsFinite(point[k]))
            {
                throw Invalid(field, $"value {k + 1} is {point[k]}; every value must be a finite number");
            }
        }

        return [.. point];
    }

    /// <summary>An http or https address with a host and port, as workers announce themselves.</summary>
    public static Uri Address(string text, string field)
    {
        Id(text, field);
        if (!Uri.TryCreate(text, UriKind.Absolute, out var uri) || (uri.Scheme != Uri.UriSchemeHttp && uri.Scheme != Uri.UriSchemeHttps)
            || string.IsNullOrEmpty(uri.Host) || uri.Port <= 0 || uri.AbsolutePath != "/" || uri.Query.Length > 0)
        {
            throw Invalid(field, $"'{text}' is not an address like http://10.0.0.7:7401");
        }

        return uri;
    }

    /// <summary>The ranges cluster.proto states for each field of <see cref="SweepSettings"/>.</summary>
    public static void Settings(SweepSettings? settings, string field)
    {
        if (settings is null)
        {
            throw Invalid(field, "is required");
        }

        if (settings.Divisions.Count == 0)
        {
            throw Invalid($"{field}.divisions", "is required (tiles per parameter axis)");
        }

        if (settings.Divisions.Count > 64)
        {
            throw Invalid($"{field}.divisions", $"{settings.Divisions.Count} axes given; families have at most 64 parameters");
        }

        for (var k = 0; k < settings.Divisions.Count; k++)
        {
            if (settings.Divisions[k] is < 1 or > 4096)
            {
                throw Invalid($"{field}.divisions", $"value {k + 1} is {settings.Divisions[k]}; tiles per axis must be between 1 and 4096");
            }
        }

        if (settings.LinesPerTile is < 1 or > 10_000)
        {
            throw Invalid($"{field}.lines_per_tile", $"must be between 1 and 10000, got {settings.LinesPerTile}");
        }

        if (settings.RefineDepth is < 0 or > 12)
        {
            throw Invalid($"{field}.refine_depth", $"must be between 0 and 12, got {settings.RefineDepth}");
        }

        if (!(settings.DeltaFraction > 0 && settings.DeltaFraction < 0.25))
        {
            throw Invalid($"{field}.delta_fraction", string.Create(CultureInfo.InvariantCulture, $"must be in (0, 0.25), got {settings.DeltaFraction}"));
        }

        if (settings.SampleBudget < 0)
        {
            throw Invalid($"{field}.sample_budget", $"must be 0 (no limit) or positive, got {settings.SampleBudget}");
        }
    }

    // -----------------------------------------------------------------------------------------------------------
    // Each RPC's checks, as the services call them (and the decoding fuzz runs them on every mutant that decodes).
    // -----------------------------------------------------------------------------------------------------------

    /// <summary>
    /// Checks a sweep submission up front: the settings, the sweep's planned tiles and samples, the family (parsed
    /// under <see cref="RequestLimits.Family"/>) and the paths its solves track. Returns the family and options to run.
    /// </summary>
    public static SweepSubmission SubmitSweep(SubmitSweepRequest request, RequestLimits limits, int threads = 1)
    {
        ArgumentNullException.ThrowIfNull(request);
        ArgumentNullException.ThrowIfNull(limits);
        Settings(request.Settings, "settings");
        Id(request.Source, "source", required: false);
        if (string.IsNullOrWhiteSpace(request.FamilyJson))
        {
            throw Invalid("family_json", "is required (the family file's JSON text)");
        }

        var bytes = Encoding.UTF8.GetByteCount(request.FamilyJson);
        if (bytes > limits.Family.MaxFileBytes)
        {
            throw Exceeds("family_json", $"{bytes} bytes", "max-family-bytes", limits.Family.MaxFileBytes);
        }

        SweepShape(request.Settings, limits, "sweep");
        var source = string.IsNullOrEmpty(request.Source) ? "submitted family" : request.Source;
        var family = Family(request.FamilyJson, source, limits.Family, "family_json");
        if (family.Parameters.Count == 0)
        {
            throw Invalid("family_json", $"{source}: a sweep needs at least one parameter with a box");
        }

        SweepOptions options;
        try
        {
            options = Conversions.ToOptions(request.Settings, family.Parameters.Count, threads);
        }
        catch (ArgumentException e)
        {
            throw Invalid("settings", e.Message);
        }

        var (paths, why) = ExpectedPaths(family, options.StartMethod);
        if (paths > limits.MaxPaths)
        {
            throw Exceeds("sweep", $"each solve of the family tracks {paths} paths ({why})", "max-paths", limits.MaxPaths);
        }

        return new SweepSubmission(family, options);
    }

    public static void WatchSweep(WatchSweepRequest request)
    {
        ArgumentNullException.ThrowIfNull(request);
        if (request.SweepId <= 0)
        {
            throw Invalid("sweep_id", $"must be a sweep id (positive), got {request.SweepId}");
        }
    }

    public static void ListVersions(ListVersionsRequest request)
    {
        ArgumentNullException.ThrowIfNull(request);
        Id(request.AtlasId, "atlas_id", required: false);
    }

    /// <summary>Checks a shard request; returns its level-0 tile.</summary>
    public static TileKey FetchShard(ShardRequest request)
    {
        ArgumentNullException.ThrowIfNull(request);
        Id(request.AtlasId, "atlas_id");
        Version(request.Version, "version");
        return RootTile(request.TileKey, "tile_key");
    }

    /// <summary>
    /// Checks what an ask can be checked for before its atlas is read: ids, version, and a point of finite values no
    /// longer than a family may be (its length against the atlas's family is checked once the atlas is known).
    /// </summary>
    public static void Ask(AskRequest request, RequestLimits limits, string prefix = "")
    {
        ArgumentNullException.ThrowIfNull(request);
        ArgumentNullException.ThrowIfNull(limits);
        Id(request.AtlasId, $"{prefix}atlas_id");
        Id(request.RequestId, $"{prefix}request_id", required: false);
        Version(request.Version, $"{prefix}version");
        if (request.Point.Count > limits.Family.MaxParameters)
        {
            throw Exceeds($"{prefix}point", $"{request.Point.Count} values", "max-parameters", limits.Family.MaxParameters);
        }

        Point(request.Point, request.Point.Count, $"{prefix}point");
    }

    /// <summary>Checks a worker's registration; returns the address it announced.</summary>
    public static Uri RegisterWorker(RegisterWorkerRequest request)
    {
        ArgumentNullException.ThrowIfNull(request);
        Id(request.WorkerId, "worker_id");
        var address = Address(request.Address, "address");
        if (request.Threads is < 1 or > 4096)
        {
            throw Invalid("threads", $"must be between 1 and 4096, got {request.Threads}");
        }

        return address;
    }

    public static void Heartbeat(HeartbeatRequest request)
    {
        ArgumentNullException.ThrowIfNull(request);
        Id(request.WorkerId, "worker_id");
    }

    public static void DeregisterWorker(DeregisterWorkerRequest request)
    {
        ArgumentNullException.ThrowIfNull(request);
        Id(request.WorkerId, "worker_id");
        Id(request.Reason, "reason", required: false);
    }

    public static void FetchSweepSetup(SweepSetupRequest request, RequestLimits limits)
    {
        ArgumentNullException.ThrowIfNull(request);
        ArgumentNullException.ThrowIfNull(limits);
        Id(request.FamilyHash, "family_hash");
        Settings(request.Settings, "settings");
        SweepShape(request.Settings, limits, "sweep");
    }

    /// <summary>
    /// Checks a tile task on a worker: the settings and the sweep's shape under the worker's limits, and a tile key
    /// that lies on the sweep's grid at a level the sweep refines to. Returns the tile.
    /// </summary>
    public static TileKey RunTile(TileTask task, RequestLimits limits)
    {
        ArgumentNullException.ThrowIfNull(task);
        ArgumentNullException.ThrowIfNull(limits);
        Id(task.FamilyHash, "family_hash");
        Settings(task.Settings, "settings");
        SweepShape(task.Settings, limits, "sweep");
        var key = Tile(task.TileKey, "tile_key");
        if (key.Level > task.Settings.RefineDepth)
        {
            throw Invalid("tile_key", $"{key} is a level-{key.Level} tile; the sweep refines to depth {task.Settings.RefineDepth}");
        }

        if (!key.FitsIn(task.Settings.Divisions))
        {
            throw Invalid("tile_key", $"{key} lies outside the {string.Join('x', task.Settings.Divisions)} grid");
        }

        return key;
    }

    /// <summary>Checks a resolve routed to a worker; returns its level-0 tile.</summary>
    public static TileKey Resolve(ResolveRequest request, RequestLimits limits)
    {
        ArgumentNullException.ThrowIfNull(request);
        ArgumentNullException.ThrowIfNull(limits);
        var ask = request.Ask ?? throw Invalid("ask", "is required");
        Ask(ask, limits, "ask.");
        var tile = RootTile(request.TileKey, "tile_key");
        if (request.Version < 1)
        {
            throw Invalid("version", $"must name a committed version (1 or more), got {request.Version}");
        }

        if (ask.Point.Count != tile.Coordinates.Length)
        {
            throw Invalid("ask.point", $"{ask.Point.Count} values given for the {tile.Coordinates.Length}-parameter tile {tile}");
        }

        return tile;
    }

    // -----------------------------------------------------------------------------------------------------------
    // Limits
    // -----------------------------------------------------------------------------------------------------------

    /// <summary>"subject: value exceeds the limit name = limit" as InvalidArgument.</summary>
    public static RpcException Exceeds(string subject, string value, string limit, long configured) =>
        new(new Status(StatusCode.InvalidArgument, string.Create(CultureInfo.InvariantCulture, $"{subject}: {value} exceeds the limit {limit} = {configured}")));

    /// <summary>
    /// The tiles and samples a sweep with these (range-checked) settings may plan, against
    /// <see cref="RequestLimits.MaxTilesPerSweep"/> and <see cref="RequestLimits.MaxSamplesPerSweep"/>.
    /// </summary>
    public static void SweepShape(SweepSettings settings, RequestLimits limits, string subject)
    {
        ArgumentNullException.ThrowIfNull(settings);
        ArgumentNullException.ThrowIfNull(limits);
        var plan = SweepPlan.Of(settings);
        if (plan.Tiles > limits.MaxTilesPerSweep)
        {
            var what = plan.Refined.IsZero
                ? $"{plan.Tiles} tiles"
                : $"{plan.Tiles} tiles ({plan.LevelZero} at level 0 and up to {plan.Refined} more by refining to depth {settings.RefineDepth}"
                  + (settings.SampleBudget > 0 ? $" within the sample budget {settings.SampleBudget})" : "; a sample_budget bounds refinement)");
            throw Exceeds(subject, what, "max-tiles-per-sweep", limits.MaxTilesPerSweep);
        }

        if (settings.SampleBudget > limits.MaxSamplesPerSweep)
        {
            throw Exceeds(subject, $"sample_budget {settings.SampleBudget}", "max-samples-per-sweep", limits.MaxSamplesPerSweep);
        }

        if (plan.Samples > limits.MaxSamplesPerSweep)
        {
            throw Exceeds(
                subject,
                $"at least {plan.Samples} samples ({plan.Tiles} tiles × {settings.LinesPerTile} lines × {SweepPlan.SamplesPerLine} samples per line)",
                "max-samples-per-sweep",
                limits.MaxSamplesPerSweep);
        }
    }

    /// <summary>
    /// The paths each solve of a sweep tracks, and why: the Bézout number when the start fiber is computed by total
    /// degree (chosen as <see cref="StartFiberFactory.Choose"/> would), else the family's stated root count, or the
    /// Bézout number when none is stated (it bounds the number of solutions).
    /// </summary>
    public static (BigInteger Paths, string Why) ExpectedPaths(FamilyDefinition family, StartFiberMethod method)
    {
        ArgumentNullException.ThrowIfNull(family);
        if (method == StartFiberMethod.Auto)
        {
            method = StartFiberFactory.Choose(family.System, family.RootCount).Method;
        }

        var bezout = family.System.BezoutNumber;
        return method == StartFiberMethod.TotalDegree
            ? (bezout, "the Bézout number; the start fiber is computed by total degree")
            : family.RootCount is { } roots
                ? (roots, "the family's root count; the start fiber is computed by monodromy")
                : (bezout, "the Bézout number bounds the root count, which the family does not state");
    }

    /// <summary>A start fiber a tile or resolve tracks from, against <see cref="RequestLimits.MaxPaths"/>.</summary>
    public static void StartFiberPaths(int rootCount, string kind, RequestLimits limits, string subject)
    {
        ArgumentNullException.ThrowIfNull(limits);
        if (rootCount > limits.MaxPaths)
        {
            throw Exceeds(subject, $"each solve from the {kind} start fiber tracks {rootCount} paths", "max-paths", limits.MaxPaths);
        }
    }

    /// <summary>
    /// Reads family JSON under <paramref name="limits"/>; a bad family is InvalidArgument on <paramref name="field"/>,
    /// naming the server's family limits when one was exceeded.
    /// </summary>
    public static FamilyDefinition Family(string json, string source, FamilyLimits limits, string field)
    {
        ArgumentNullException.ThrowIfNull(limits);
        try
        {
            return FamilyReader.Parse(json, source, limits);
        }
        catch (InputException e)
        {
            // The reader names the value and the limit's value ("41 unknowns, above the limit of 40"); add the names.
            var named = e.Message.Contains("limit", StringComparison.Ordinal)
                ? string.Create(
                    CultureInfo.InvariantCulture,
                    $" (the server's family limits: max-family-bytes = {limits.MaxFileBytes}, max-unknowns = {limits.MaxUnknowns}, max-parameters = {limits.MaxParameters}, max-degree = {limits.MaxDegree}, max-expression-nodes = {limits.MaxExpressionNodes} per equation)")
                : string.Empty;
            throw Invalid(field, e.Message + named);
        }
    }
}

/// <summary>A checked sweep submission: the family and the options to run it with.</summary>
public sealed record SweepSubmission(FamilyDefinition Family, SweepOptions Options);
