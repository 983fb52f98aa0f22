using System.Diagnostics;
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
    private readonly string _mount = Directory.CreateTempSubdirectory("vk-full-").FullName;
    private bool _mounted;

    public void Dispose()
    {
        if (_mounted && Run("umount", _mount) != 0)
        {
            Run("umount", "-l", _mount);
        }

        Directory.Delete(_mount, recursive: true);
    }

    [RootFact]
    public void ASaveOntoAFullDisk_LeavesThePreviousFile_RemovesTheTemporary_AndSaysWhy()
    {
        Assert.True(Run("mount", "-t", "tmpfs", "-o", "size=1m,mode=0700", "vectorkit-full", _mount) == 0, "mounting a tmpfs failed");
        _mounted = true;
        string path = Path.Combine(_mount, "catalogue.vkx");
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
        Assert.Equal([path], Directory.GetFiles(_mount));
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
        string streamed = Path.Combine(_mount, "streamed.vkx");
        using (var file = new FileStream(streamed, FileMode.CreateNew, FileAccess.Write))
        {
            var direct = Assert.ThrowsAny<IOException>(() => IndexFile.Save(larger, file));
            Assert.Contains("No space left on device", direct.Message, StringComparison.Ordinal);
        }

        var rejected = Assert.Throws<IndexFileException>(() => IndexFile.Load(streamed).Dispose());
        Assert.Contains("truncated", rejected.Message, StringComparison.Ordinal);
    }

    private static int Run(string program, params string[] arguments)
    {
        var start = new ProcessStartInfo(program) { RedirectStandardError = true, UseShellExecute = false };
        foreach (string argument in arguments)
        {
            start.ArgumentList.Add(argument);
        }

        using Process process = Process.Start(start)!;
        string errors = process.StandardError.ReadToEnd();
        process.WaitForExit();
        if (process.ExitCode != 0)
        {
            Console.Error.WriteLine($"{program} {string.Join(' ', arguments)}: {errors}");
        }

        return process.ExitCode;
    }
}
