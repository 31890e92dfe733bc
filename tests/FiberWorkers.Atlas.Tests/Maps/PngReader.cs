using System.Buffers.Binary;
using System.IO.Compression;
using System.Text;

namespace FiberWorkers.Atlas.Tests.Maps;

/// <summary>
/// A minimal PNG decoder of our own (ISO/IEC 15948): checks the signature and chunk CRCs, inflates the IDAT stream
/// and undoes the five scanline filters, for 8-bit RGB or RGBA images without interlacing. Independent of the
/// renderer, so the tests check a PNG any reader would accept.
/// </summary>
internal sealed class PngReader
{
    private static readonly byte[] Signature = [137, 80, 78, 71, 13, 10, 26, 10];

    private readonly byte[] _pixels;
    private readonly int _channels;

    private PngReader(int width, int height, int channels, byte[] pixels)
    {
        Width = width;
        Height = height;
        _channels = channels;
        _pixels = pixels;
    }

    public int Width { get; }

    public int Height { get; }

    /// <summary>The pixel's color as #RRGGBB (alpha ignored).</summary>
    public string Hex(int column, int row)
    {
        var at = ((row * Width) + column) * _channels;
        return $"#{_pixels[at]:X2}{_pixels[at + 1]:X2}{_pixels[at + 2]:X2}";
    }

    /// <summary>The most frequent color in the square of half-side <paramref name="radius"/> around a pixel.</summary>
    public string Dominant(int column, int row, int radius)
    {
        var counts = new Dictionary<string, int>(StringComparer.Ordinal);
        for (var r = Math.Max(0, row - radius); r <= Math.Min(Height - 1, row + radius); r++)
        {
            for (var c = Math.Max(0, column - radius); c <= Math.Min(Width - 1, column + radius); c++)
            {
                var hex = Hex(c, r);
                counts[hex] = counts.GetValueOrDefault(hex) + 1;
            }
        }

        return counts.OrderByDescending(p => p.Value).ThenBy(p => p.Key, StringComparer.Ordinal).First().Key;
    }

    public static PngReader Decode(byte[] png)
    {
        Assert.True(png.AsSpan().StartsWith(Signature), "not a PNG signature");
        var position = Signature.Length;
        int width = 0, height = 0, channels = 0;
        using var compressed = new MemoryStream();
        var ended = false;
        while (!ended)
        {
            var length = checked((int)BinaryPrimitives.ReadUInt32BigEndian(png.AsSpan(position)));
            var type = Encoding.ASCII.GetString(png, position + 4, 4);
            var data = png.AsSpan(position + 8, length);
            var crc = BinaryPrimitives.ReadUInt32BigEndian(png.AsSpan(position + 8 + length));
            Assert.Equal(crc, Crc32(png.AsSpan(position + 4, length + 4)));
            switch (type)
            {
                case "IHDR":
                    width = checked((int)BinaryPrimitives.ReadUInt32BigEndian(data));
                    height = checked((int)BinaryPrimitives.ReadUInt32BigEndian(data[4..]));
                    Assert.Equal(8, data[8]);
                    channels = data[9] switch
                    {
                        2 => 3,
                        6 => 4,
                        _ => throw new NotSupportedException($"PNG color type {data[9]}"),
                    };
                    Assert.Equal(0, data[12]);
                    break;
                case "IDAT":
                    compressed.Write(data);
                    break;
                case "IEND":
                    ended = true;
                    break;
            }

            position += 12 + length;
        }

        compressed.Position = 0;
        using var inflater = new ZLibStream(compressed, CompressionMode.Decompress);
        using var raw = new MemoryStream();
        inflater.CopyTo(raw);
        var bytes = raw.ToArray();
        var stride = width * channels;
        Assert.Equal(height * (stride + 1), bytes.Length);
        var pixels = new byte[height * stride];
        for (var row = 0; row < height; row++)
        {
            var filter = bytes[row * (stride + 1)];
            for (var i = 0; i < stride; i++)
            {
                var x = bytes[(row * (stride + 1)) + 1 + i];
                int a = i >= channels ? pixels[(row * stride) + i - channels] : 0;
                int b = row > 0 ? pixels[((row - 1) * stride) + i] : 0;
                int c = i >= channels && row > 0 ? pixels[((row - 1) * stride) + i - channels] : 0;
                pixels[(row * stride) + i] = (byte)(filter switch
                {
                    0 => x,
                    1 => x + a,
                    2 => x + b,
                    3 => x + ((a + b) / 2),
                    4 => x + Paeth(a, b, c),
                    _ => throw new NotSupportedException($"PNG filter {filter}"),
                });
            }
        }

        return new PngReader(width, height, channels, pixels);
    }

    private static int Paeth(int a, int b, int c)
    {
        var p = a + b - c;
        var pa = Math.Abs(p - a);
        var pb = Math.Abs(p - b);
        var pc = Math.Abs(p - c);
        return pa <= pb && pa <= pc ? a : pb <= pc ? b : c;
    }

    private static uint Crc32(ReadOnlySpan<byte> data)
    {
        var crc = 0xFFFFFFFFu;
        foreach (var value in data)
        {
            crc ^= value;
            for (var bit = 0; bit < 8; bit++)
            {
                crc = (crc & 1) != 0 ? (crc >> 1) ^ 0xEDB88320u : crc >> 1;
            }
        }

        return ~crc;
    }
}
