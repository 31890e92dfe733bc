using System.Buffers;
using System.Buffers.Binary;
using System.Globalization;
using System.Text;
using Microsoft.AspNetCore.Http;

namespace FiberWorkers.Cluster.Hosting;

/// <summary>
/// Refuses a gRPC request whose message is larger than the server's limit before it is read: the 5-byte gRPC frame
/// header (compression flag, 32-bit big-endian length) is peeked from the request body, and a message over the limit
/// gets a trailers-only ResourceExhausted answer naming the limit, its value and the message's size. gRPC's own check
/// (kept behind this one, and the only one for compressed messages once inflated) says only "Received message exceeds
/// the maximum configured message size".
/// </summary>
internal static class MessageSizeLimit
{
    private const int HeaderBytes = 5;

    /// <summary>The middleware for a limit of <paramref name="maxBytes"/> bytes per message.</summary>
    public static Func<RequestDelegate, RequestDelegate> Create(int maxBytes) => next => async context =>
    {
        var request = context.Request;
        if (request.ContentType is not { } type || !type.StartsWith("application/grpc", StringComparison.Ordinal))
        {
            await next(context).ConfigureAwait(false);
            return;
        }

        var reader = request.BodyReader;
        var read = await reader.ReadAtLeastAsync(HeaderBytes, context.RequestAborted).ConfigureAwait(false);
        var buffer = read.Buffer;
        long length = -1;
        if (buffer.Length >= HeaderBytes)
        {
            var header = new byte[HeaderBytes];
            buffer.Slice(0, HeaderBytes).CopyTo(header);
            length = BinaryPrimitives.ReadUInt32BigEndian(header.AsSpan(1));
        }

        // Nothing consumed or examined: gRPC reads the same bytes next, at once.
        reader.AdvanceTo(buffer.Start);
        if (length > maxBytes)
        {
            var detail = string.Create(CultureInfo.InvariantCulture, $"request: a message of {length} bytes exceeds the limit max-message-bytes = {maxBytes}");
            context.Response.StatusCode = StatusCodes.Status200OK;
            context.Response.ContentType = "application/grpc";
            context.Response.Headers["grpc-status"] = "8"; // ResourceExhausted
            context.Response.Headers["grpc-message"] = PercentEncode(detail);
            return;
        }

        await next(context).ConfigureAwait(false);
    };

    /// <summary>grpc-message is percent-encoded: bytes outside printable ASCII, and '%' itself.</summary>
    private static string PercentEncode(string text)
    {
        var encoded = new StringBuilder(text.Length);
        foreach (var b in Encoding.UTF8.GetBytes(text))
        {
            if (b is < 0x20 or > 0x7E or (byte)'%')
            {
                encoded.Append(CultureInfo.InvariantCulture, $"%{b:X2}");
            }
            else
            {
                encoded.Append((char)b);
            }
        }

        return encoded.ToString();
    }
}
