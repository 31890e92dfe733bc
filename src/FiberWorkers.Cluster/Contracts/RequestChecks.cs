using FiberWorkers.Atlas.Tiles;
using FiberWorkers.Contracts.V1;
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
    }
}
