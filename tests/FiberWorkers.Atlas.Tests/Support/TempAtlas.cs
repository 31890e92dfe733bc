using FiberWorkers.Atlas.Stores;

namespace FiberWorkers.Atlas.Tests.Support;

/// <summary>A fresh atlas file path in a test directory of its own, deleted (with its WAL files) on dispose.</summary>
internal sealed class TempAtlas : IDisposable
{
    public TempAtlas(string name = "atlas")
    {
        Folder = System.IO.Path.Combine(System.IO.Path.GetTempPath(), "fiberworkers-atlas-tests", Guid.NewGuid().ToString("N"));
        Directory.CreateDirectory(Folder);
        Path = System.IO.Path.Combine(Folder, $"{name}.db");
    }

    public string Folder { get; }

    public string Path { get; }

    public SqliteAtlasStore Open() => SqliteAtlasStore.Open(Path);

    public void Dispose()
    {
        try
        {
            Directory.Delete(Folder, recursive: true);
        }
        catch (IOException)
        {
            // A child process killed by a test may still hold the file for a moment; the directory is unique.
        }
        catch (UnauthorizedAccessException)
        {
        }
    }
}
