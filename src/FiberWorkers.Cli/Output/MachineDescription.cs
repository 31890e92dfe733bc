using System.Runtime.InteropServices;
using System.Text.Json;

namespace FiberWorkers.Cli.Output;

/// <summary>What a benchmark ran on: CPU model, cores, OS and runtime.</summary>
internal static class MachineDescription
{
    public static string Cpu
    {
        get
        {
            try
            {
                var line = File.ReadLines("/proc/cpuinfo").FirstOrDefault(l => l.StartsWith("model name", StringComparison.Ordinal));
                return line is null ? RuntimeInformation.ProcessArchitecture.ToString() : line[(line.IndexOf(':', StringComparison.Ordinal) + 1)..].Trim();
            }
            catch (IOException)
            {
                return RuntimeInformation.ProcessArchitecture.ToString();
            }
        }
    }

    public static void Write(Utf8JsonWriter writer)
    {
        writer.WriteStartObject("machine");
        writer.WriteString("cpu", Cpu);
        writer.WriteNumber("cores", Environment.ProcessorCount);
        writer.WriteString("os", RuntimeInformation.OSDescription);
        writer.WriteString("runtime", RuntimeInformation.FrameworkDescription);
        writer.WriteString("date", DateTime.UtcNow.ToString("yyyy-MM-dd", System.Globalization.CultureInfo.InvariantCulture));
        writer.WriteEndObject();
    }
}
