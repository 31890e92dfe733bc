using System.Buffers.Binary;
using System.Security.Cryptography;
using System.Text;

namespace FiberWorkers.Cluster.Routing;

/// <summary>
/// Rendezvous (highest-random-weight) hashing of tile keys over workers (Thaler &amp; Ravishankar 1998): each
/// (tile, worker) pair gets a pseudo-random weight and a tile goes to the worker of highest weight, then the next.
/// When a worker joins or leaves, only the tiles whose first choice it is move. The weight is the first 8 bytes of
/// SHA-256 over "tile\nworker", so any client with the worker list computes the same order as the coordinator.
/// </summary>
public static class Rendezvous
{
    /// <summary>The weight of a tile on a worker.</summary>
    public static ulong Weight(string tileKey, string workerId)
    {
        ArgumentNullException.ThrowIfNull(tileKey);
        ArgumentNullException.ThrowIfNull(workerId);
        var text = Encoding.UTF8.GetBytes($"{tileKey}\n{workerId}");
        Span<byte> hash = stackalloc byte[32];
        SHA256.HashData(text, hash);
        return BinaryPrimitives.ReadUInt64BigEndian(hash);
    }

    /// <summary>The workers in the order a tile tries them: highest weight first, ties by worker id.</summary>
    public static IReadOnlyList<T> Order<T>(string tileKey, IEnumerable<T> workers, Func<T, string> id)
    {
        ArgumentNullException.ThrowIfNull(workers);
        ArgumentNullException.ThrowIfNull(id);
        return [.. workers
            .Select(w => (Worker: w, Id: id(w)))
            .OrderByDescending(w => Weight(tileKey, w.Id))
            .ThenBy(w => w.Id, StringComparer.Ordinal)
            .Select(w => w.Worker)];
    }
}
