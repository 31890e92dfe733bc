using FiberWorkers.Algebra.Families;

namespace FiberWorkers.Atlas.Exports;

/// <summary>
/// File handling shared by the exporters: the output directory is created when absent, and each file is written
/// to a temporary name and moved into place, so a failed export never leaves a truncated table behind. I/O
/// failures become input errors that name the path.
/// </summary>
internal static class ExportFiles
{
    /// <summary>Creates the directory when absent; an existing file of that name or a failure is an input error.</summary>
    public static string PrepareDirectory(string directory)
    {
        ArgumentException.ThrowIfNullOrWhiteSpace(directory);
        if (File.Exists(directory))
        {
            throw new InputException(directory, string.Empty, "is a file; --out names a directory for the exported tables");
        }

        try
        {
            return Directory.CreateDirectory(directory).FullName;
        }
        catch (Exception e) when (e is IOException or UnauthorizedAccessException or NotSupportedException)
        {
            throw new InputException(directory, string.Empty, $"cannot create the output directory ({e.Message.TrimEnd('.')})");
        }
    }

    /// <summary>Writes a file through a temporary sibling and moves it into place.</summary>
    public static async Task WriteAsync(string path, Func<Stream, Task> write)
    {
        var temporary = $"{path}.partial";
        try
        {
            await using (var stream = new FileStream(temporary, FileMode.Create, FileAccess.Write, FileShare.None, 1 << 16, useAsync: true))
            {
                await write(stream).ConfigureAwait(false);
            }

            File.Move(temporary, path, overwrite: true);
        }
        catch (Exception e) when (e is IOException or UnauthorizedAccessException)
        {
            TryDelete(temporary);
            throw new InputException(path, string.Empty, $"cannot write the file ({e.Message.TrimEnd('.')})");
        }
        catch
        {
            TryDelete(temporary);
            throw;
        }
    }

    private static void TryDelete(string path)
    {
        try
        {
            File.Delete(path);
        }
        catch (Exception e) when (e is IOException or UnauthorizedAccessException)
        {
            // The original failure is the one worth reporting; a leftover .partial file is harmless.
        }
    }
}
