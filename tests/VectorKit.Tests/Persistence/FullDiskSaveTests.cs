using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Persistence;
using VectorKit.SaveChild;
using VectorKit.Tests.TestData;

namespace VectorKit.Tests.Persistence;

/// <summary>
/// A save that runs out of space on a real file system (a 1 MiB tmpfs, mounted for the test): the previous file stays
/// as it was, the temporary file is gone (its space is free again), and the exception names the target and the cause.
/// </summary>
public sealed class FullDiskSaveTests : IDisposable
{
    private readonly SmallTmpfs _disk = new();

    public void Dispose() => _disk.Dispose();

    [RootFact]
    public void ASaveOntoAFullDisk_LeavesThePreviousFile_RemovesTheTemporary_AndSaysWhy()
    {
        _disk.Mount("1m");
        string mount = _disk.Folder;
        string path = Path.Combine(mount, "catalogue.vkx");
        using ExactIndex previous = CrashSample.Build(1_000, 32, 5);
        IndexFile.Save(previous, path);
        byte[] before = File.ReadAllBytes(path);

        // About 2.6 MB: more than the whole file system.
        using ExactIndex larger = CrashSample.Build(20_000, 32, 6);
        var e = Assert.Throws<IOException>(() => IndexFile.Save(larger, path));
        Assert.StartsWith($"Cannot save the index to '{path}': writing the temporary file failed: No space left on device", e.Message, StringComparison.Ordinal);
        Assert.EndsWith("The previous file, if any, is unchanged; the temporary file was deleted.", e.Message, StringComparison.Ordinal);
        Assert.Equal(e.InnerException!.HResult, e.HResult);
        Assert.Equal(before, File.ReadAllBytes(path));
        Assert.Equal([path], Directory.GetFiles(mount));
        using (ExactIndex loaded = IndexFile.Load<ExactIndex>(path))
        {
            float[] query = CrashSample.Vectors(1, 32, 9);
            Assert.Equal(previous.Search(query, 10), loaded.Search(query, 10));
        }

        // The temporary's space is free again: a save that fits beside the previous file succeeds.
        using ExactIndex fits = CrashSample.Build(2_000, 32, 7);
        IndexFile.Save(fits, path);
        using (ExactIndex replaced = IndexFile.Load<ExactIndex>(path))
        {
            Assert.Equal(fits.Count, replaced.Count);
        }

        // Saving to a caller's stream on the full disk: the system's exception, unchanged, and a prefix that loads as truncated.
        string streamed = Path.Combine(mount, "streamed.vkx");
        using (var file = new FileStream(streamed, FileMode.CreateNew, FileAccess.Write))
        {
            var direct = Assert.ThrowsAny<IOException>(() => IndexFile.Save(larger, file));
            Assert.Contains("No space left on device", direct.Message, StringComparison.Ordinal);
        }

        var rejected = Assert.Throws<IndexFileException>(() => IndexFile.Load(streamed).Dispose());
        Assert.Contains("truncated", rejected.Message, StringComparison.Ordinal);
    }
}
