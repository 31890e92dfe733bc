using System.Text;
using System.Text.Encodings.Web;
using System.Text.Json;

namespace FiberWorkers.Cli.Output;

/// <summary>Writes one indented JSON document to a text writer.</summary>
internal static class JsonOutput
{
    private static readonly JsonWriterOptions Options = new()
    {
        Indented = true,
        Encoder = JavaScriptEncoder.UnsafeRelaxedJsonEscaping,
    };

    public static void Write(TextWriter output, Action<Utf8JsonWriter> body)
    {
        using var buffer = new MemoryStream();
        using (var writer = new Utf8JsonWriter(buffer, Options))
        {
            body(writer);
        }

        output.WriteLine(Encoding.UTF8.GetString(buffer.ToArray()));
    }
}
