using System.Numerics;
using System.Text;
using System.Text.Json;
using FiberWorkers.Algebra.Families;

namespace FiberWorkers.Solving.StartFibers;

/// <summary>
/// Saves and loads start fibers in our own versioned JSON format (<c>fiberworkers.start-fiber</c>, version 1):
/// the family content hash, p₀, the solutions as [re, im] pairs, and the provenance. Loading checks the format,
/// the version, the shape and that the family hash matches.
/// </summary>
public static class StartFiberFile
{
    /// <summary>The format name written into every file.</summary>
    public const string FormatName = "fiberworkers.start-fiber";

    /// <summary>The current format version.</summary>
    public const int Version = 1;

    private static readonly UTF8Encoding StrictUtf8 = new(encoderShouldEmitUTF8Identifier: false, throwOnInvalidBytes: true);

    /// <summary>Writes <paramref name="fiber"/> to <paramref name="path"/> (atomically: a temporary file then a rename).</summary>
    public static void Save(StartFiber fiber, string path)
    {
        ArgumentNullException.ThrowIfNull(fiber);
        ArgumentNullException.ThrowIfNull(path);
        var temporary = path + ".tmp";
        File.WriteAllBytes(temporary, Serialize(fiber));
        File.Move(temporary, path, overwrite: true);
    }

    /// <summary>The file's bytes.</summary>
    public static byte[] Serialize(StartFiber fiber)
    {
        ArgumentNullException.ThrowIfNull(fiber);
        using var buffer = new MemoryStream();
        using (var writer = new Utf8JsonWriter(buffer, new JsonWriterOptions { Indented = true }))
        {
            writer.WriteStartObject();
            writer.WriteString("format", FormatName);
            writer.WriteNumber("version", Version);
            writer.WriteString("familyHash", fiber.FamilyHash);
            writer.WriteStartObject("provenance");
            writer.WriteString("method", fiber.Provenance.Method);
            writer.WriteNumber("seed", fiber.Provenance.Seed);
            writer.WriteNumber("pathsTracked", fiber.Provenance.PathsTracked);
            writer.WriteString("completeness", fiber.Provenance.Completeness);
            writer.WriteString("note", fiber.Provenance.Note);
            writer.WriteEndObject();
            writer.WriteStartArray("unknowns");
            foreach (var name in fiber.Unknowns)
            {
                writer.WriteStringValue(name);
            }

            writer.WriteEndArray();
            writer.WritePropertyName("parameters");
            WriteVector(writer, fiber.Parameters);
            writer.WriteStartArray("solutions");
            foreach (var solution in fiber.Solutions)
            {
                WriteVector(writer, solution);
            }

            writer.WriteEndArray();
            writer.WriteEndObject();
        }

        return buffer.ToArray();
    }

    /// <summary>Reads a start fiber; when <paramref name="expectedFamilyHash"/> is given it must match.</summary>
    public static StartFiber Load(string path, string? expectedFamilyHash = null)
    {
        ArgumentNullException.ThrowIfNull(path);
        byte[] bytes;
        try
        {
            bytes = File.ReadAllBytes(path);
        }
        catch (Exception e) when (e is IOException or UnauthorizedAccessException)
        {
            throw new InputException(path, string.Empty, $"cannot read the start fiber: {e.Message}");
        }

        return Deserialize(bytes, Path.GetFileName(path), expectedFamilyHash);
    }

    /// <summary>Parses start-fiber bytes; <paramref name="source"/> names them in errors.</summary>
    public static StartFiber Deserialize(ReadOnlySpan<byte> bytes, string source, string? expectedFamilyHash = null)
    {
        // The JSON reader checks UTF-8 only when a string is read (and then throws a bare InvalidOperationException).
        try
        {
            _ = StrictUtf8.GetCharCount(bytes);
        }
        catch (DecoderFallbackException e)
        {
            throw new InputException(source, $"byte {e.Index + 1}", "not a start fiber (the file is not valid UTF-8)");
        }

        JsonDocument document;
        try
        {
            var reader = new Utf8JsonReader(bytes, new JsonReaderOptions { MaxDepth = 8 });
            document = JsonDocument.ParseValue(ref reader);
        }
        catch (JsonException e)
        {
            // A truncated or garbled file is the usual way this fails; say where the JSON stops making sense.
            var location = e.LineNumber is { } line ? $"line {line + 1}, column {Column(bytes, line, e.BytePositionInLine ?? 0)}" : string.Empty;
            throw new InputException(source, location, $"not a start fiber (invalid JSON: {WithoutPosition(e.Message)})");
        }

        using (document)
        {
            var root = document.RootElement;
            if (root.ValueKind != JsonValueKind.Object)
            {
                throw new InputException(source, string.Empty, "not a start fiber (expected a JSON object)");
            }

            var format = String(root, "format", source);
            if (format != FormatName)
            {
                throw new InputException(source, "format", $"expected '{FormatName}', found '{format}'");
            }

            var version = Required(root, "version", source);
            if (version.ValueKind != JsonValueKind.Number || !version.TryGetInt32(out var v) || v != Version)
            {
                throw new InputException(source, "version", $"unsupported version {version.GetRawText()}; this build reads version {Version}");
            }

            var hash = String(root, "familyHash", source);
            if (expectedFamilyHash is not null && hash != expectedFamilyHash)
            {
                throw new InputException(
                    source, "familyHash", $"the start fiber belongs to family {Short(hash)}, not to this family ({Short(expectedFamilyHash)})");
            }

            var provenanceElement = Required(root, "provenance", source);
            var provenance = new StartFiberProvenance(
                String(provenanceElement, "method", source),
                Required(provenanceElement, "seed", source) is { ValueKind: JsonValueKind.Number } seedElement
                    && seedElement.TryGetUInt64(out var seed) ? seed
                    : throw new InputException(source, "provenance.seed", "expected a non-negative integer"),
                Required(provenanceElement, "pathsTracked", source) is { ValueKind: JsonValueKind.Number } pathsElement
                    && pathsElement.TryGetInt64(out var paths) ? paths
                    : throw new InputException(source, "provenance.pathsTracked", "expected an integer"),
                String(provenanceElement, "completeness", source),
                String(provenanceElement, "note", source));

            var unknowns = Required(root, "unknowns", source);
            if (unknowns.ValueKind != JsonValueKind.Array)
            {
                throw new InputException(source, "unknowns", "expected an array of names");
            }

            var names = unknowns.EnumerateArray().Select((e, i) => e.ValueKind == JsonValueKind.String ? Text(e, source, $"unknowns[{i}]")
                : throw new InputException(source, "unknowns", "expected an array of names")).ToArray();
            var parameters = ReadVector(Required(root, "parameters", source), source, "parameters", -1);
            var solutionsElement = Required(root, "solutions", source);
            if (solutionsElement.ValueKind != JsonValueKind.Array)
            {
                throw new InputException(source, "solutions", "expected an array of solutions");
            }

            var solutions = new List<Complex[]>();
            var index = 0;
            foreach (var element in solutionsElement.EnumerateArray())
            {
                solutions.Add(ReadVector(element, source, $"solutions[{index++}]", names.Length));
            }

            return new StartFiber(hash, names, parameters, solutions, provenance);
        }
    }

    private static void WriteVector(Utf8JsonWriter writer, ReadOnlySpan<Complex> values)
    {
        writer.WriteStartArray();
        foreach (var value in values)
        {
            writer.WriteStartArray();
            writer.WriteNumberValue(value.Real);
            writer.WriteNumberValue(value.Imaginary);
            writer.WriteEndArray();
        }

        writer.WriteEndArray();
    }

    private static Complex[] ReadVector(JsonElement element, string source, string location, int expectedLength)
    {
        if (element.ValueKind != JsonValueKind.Array)
        {
            throw new InputException(source, location, "expected an array of [re, im] pairs");
        }

        var values = new List<Complex>();
        foreach (var pair in element.EnumerateArray())
        {
            // TryGetDouble throws on a non-number, so the kinds are checked first.
            if (pair.ValueKind != JsonValueKind.Array || pair.GetArrayLength() != 2
                || pair[0].ValueKind != JsonValueKind.Number || pair[1].ValueKind != JsonValueKind.Number
                || !pair[0].TryGetDouble(out var re) || !pair[1].TryGetDouble(out var im)
                || !double.IsFinite(re) || !double.IsFinite(im))
            {
                throw new InputException(source, $"{location}[{values.Count}]", "expected a pair [re, im] of finite numbers");
            }

            values.Add(new Complex(re, im));
        }

        if (expectedLength >= 0 && values.Count != expectedLength)
        {
            throw new InputException(source, location, $"{values.Count} entries, expected {expectedLength} (one per unknown)");
        }

        return [.. values];
    }

    private static JsonElement Required(JsonElement parent, string name, string source) =>
        parent.ValueKind == JsonValueKind.Object && parent.TryGetProperty(name, out var value)
            ? value
            : throw new InputException(source, name, $"missing field '{name}'");

    private static string String(JsonElement parent, string name, string source)
    {
        var value = Required(parent, name, source);
        return value.ValueKind == JsonValueKind.String ? Text(value, source, name) : throw new InputException(source, name, "expected a string");
    }

    /// <summary>A string value; an escape of half a UTF-16 surrogate pair (\ud800 alone), which no string can hold, is an input error.</summary>
    private static string Text(JsonElement value, string source, string location)
    {
        try
        {
            return value.GetString()!;
        }
        catch (InvalidOperationException)
        {
            throw new InputException(source, location, "the string holds half of a UTF-16 surrogate pair (an escape such as \\ud800 alone)");
        }
    }

    /// <summary>The 1-based character column of byte offset <paramref name="bytesInLine"/> in 0-based line <paramref name="line"/>.</summary>
    private static long Column(ReadOnlySpan<byte> bytes, long line, long bytesInLine)
    {
        var start = 0;
        for (var l = 0L; l < line; l++)
        {
            var next = bytes[start..].IndexOf((byte)'\n');
            if (next < 0)
            {
                return bytesInLine + 1;
            }

            start += next + 1;
        }

        var length = (int)Math.Min(bytesInLine, bytes.Length - start);
        return Encoding.UTF8.GetCharCount(bytes.Slice(start, length)) + 1;
    }

    /// <summary>The reader's message without its own "Path: … | LineNumber: …" suffix (the location says it).</summary>
    private static string WithoutPosition(string message)
    {
        var cut = message.IndexOf(" Path:", StringComparison.Ordinal);
        if (cut < 0)
        {
            cut = message.IndexOf(" LineNumber:", StringComparison.Ordinal);
        }

        return (cut >= 0 ? message[..cut] : message).Trim().TrimEnd('|').Trim();
    }

    private static string Short(string hash) => hash.Length > 12 ? hash[..12] : hash;
}
