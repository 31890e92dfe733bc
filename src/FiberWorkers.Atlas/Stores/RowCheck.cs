using System.Buffers.Binary;
using System.Security.Cryptography;
using System.Text;

namespace FiberWorkers.Atlas.Stores;

/// <summary>
/// A checksum over one row of an atlas file, kept in the row's <c>row_check</c> column and compared on every read.
/// An atlas file travels (copies, downloads, removable disks) and SQLite checks no page contents: without it a flipped
/// bit in a version's summary, a tile key or a blob would be read back as a different, well-formed answer.
/// </summary>
internal static class RowCheck
{
    /// <summary>
    /// The first 128 bits (hex) of SHA-256 over the values in order, each tagged with its storage type and length, so
    /// that no two different rows encode alike (a value that changed type on disk changes the check too).
    /// </summary>
    public static string Of(params object?[] values)
    {
        using var hash = IncrementalHash.CreateHash(HashAlgorithmName.SHA256);
        Span<byte> head = stackalloc byte[9];
        foreach (var value in values)
        {
            switch (value)
            {
                case null or DBNull:
                    head[0] = (byte)'n';
                    hash.AppendData(head[..1]);
                    break;
                case long or int:
                    head[0] = (byte)'i';
                    BinaryPrimitives.WriteInt64LittleEndian(head[1..], Convert.ToInt64(value, System.Globalization.CultureInfo.InvariantCulture));
                    hash.AppendData(head);
                    break;
                case double real:
                    head[0] = (byte)'d';
                    BinaryPrimitives.WriteDoubleLittleEndian(head[1..], real);
                    hash.AppendData(head);
                    break;
                case string text:
                    var bytes = Encoding.UTF8.GetBytes(text);
                    head[0] = (byte)'s';
                    BinaryPrimitives.WriteInt64LittleEndian(head[1..], bytes.Length);
                    hash.AppendData(head);
                    hash.AppendData(bytes);
                    break;
                case byte[] blob:
                    head[0] = (byte)'b';
                    BinaryPrimitives.WriteInt64LittleEndian(head[1..], blob.Length);
                    hash.AppendData(head);
                    hash.AppendData(blob);
                    break;
                default:
                    throw new ArgumentException($"a row check covers integers, reals, text and blobs, not {value.GetType().Name}", nameof(values));
            }
        }

        Span<byte> digest = stackalloc byte[32];
        hash.GetHashAndReset(digest);
        return Convert.ToHexStringLower(digest[..16]);
    }

    /// <summary>
    /// The check over a version's tile map (keys in ordinal order): the map's rows carry no checks of their own, so a
    /// lost, added or altered row of the map is found as a whole.
    /// </summary>
    public static string OfTiles(IEnumerable<KeyValuePair<string, string>> tiles)
    {
        var values = new List<object?>();
        foreach (var (key, hash) in tiles.OrderBy(t => t.Key, StringComparer.Ordinal))
        {
            values.Add(key);
            values.Add(hash);
        }

        return Of([.. values]);
    }
}
