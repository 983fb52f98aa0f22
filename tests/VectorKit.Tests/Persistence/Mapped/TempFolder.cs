namespace VectorKit.Tests.Persistence.Mapped;

/// <summary>A temporary folder removed with the test class.</summary>
public sealed class TempFolder : IDisposable
{
    public TempFolder()
    {
        Path = System.IO.Path.Combine(System.IO.Path.GetTempPath(), "vectorkit-mapped-" + Guid.NewGuid().ToString("N"));
        Directory.CreateDirectory(Path);
    }

    public string Path { get; }

    public string File(string name) => System.IO.Path.Combine(Path, name);

    /// <summary>Writes <paramref name="bytes"/> to a new file of the folder; returns its path.</summary>
    public string Write(byte[] bytes)
    {
        string path = File(Guid.NewGuid().ToString("N") + ".vkx");
        System.IO.File.WriteAllBytes(path, bytes);
        return path;
    }

    public void Dispose()
    {
        try
        {
            Directory.Delete(Path, recursive: true);
        }
        catch (IOException)
        {
            // A file still mapped by a failed test; the system's temporary folder is cleaned eventually.
        }
    }
}
