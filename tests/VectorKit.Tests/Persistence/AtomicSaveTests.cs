using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Indexes.Graph;
using VectorKit.Persistence;

namespace VectorKit.Tests.Persistence;

/// <summary>A save that fails or is cancelled part-way leaves the previous file loadable and unchanged, and no temporary file.</summary>
public sealed class AtomicSaveTests : IDisposable
{
    private readonly string _folder = Directory.CreateTempSubdirectory("vk-atomic-").FullName;

    public void Dispose() => Directory.Delete(_folder, recursive: true);

    [Fact]
    public void AnExceptionPartWayThroughASave_LeavesThePreviousFileIntact()
    {
        string path = Path.Combine(_folder, "index.vkx");
        using ExactIndex previous = PersistenceSamples.Exact(count: 50);
        IndexFile.Save(previous, path);
        byte[] before = File.ReadAllBytes(path);
        using GraphIndex replacement = PersistenceSamples.Graph(count: 300);
        long full = IndexFileBytes.Save(replacement).Length;
        foreach (long failAfter in new[] { 0L, 1, 16, 100, 1000, full / 2, full - 9, full - 1 })
        {
            var e = Assert.Throws<IOException>(() => IndexFile.SaveAtomically(replacement, path, stream => new FailingStream(stream, failAfter, null), default));
            Assert.Equal(
                $"Cannot save the index to '{path}': writing the temporary file failed: injected failure after {failAfter} bytes. The previous file, if any, is unchanged; the temporary file was deleted.",
                e.Message);
            Assert.Equal($"injected failure after {failAfter} bytes", e.InnerException?.Message);
            Assert.Equal(e.InnerException!.HResult, e.HResult);
            Assert.Equal(before, File.ReadAllBytes(path));
            using var loaded = IndexFile.Load<ExactIndex>(path);
            Assert.Equal(previous.Search([0, 0, 0], 10), loaded.Search([0, 0, 0], 10));
            Assert.Equal(["index.vkx"], Directory.GetFiles(_folder).Select(Path.GetFileName));
        }

        // Without a failure the same save replaces the file.
        IndexFile.SaveAtomically(replacement, path, stream => new FailingStream(stream, long.MaxValue, null), default);
        using var replaced = IndexFile.Load<GraphIndex>(path);
        Assert.Equal(replacement.Count, replaced.Count);
    }

    [Fact]
    public void ACancellationPartWayThroughASave_LeavesThePreviousFileIntact()
    {
        string path = Path.Combine(_folder, "index.vkx");
        using ExactIndex previous = PersistenceSamples.Exact(count: 50);
        IndexFile.Save(previous, path);
        byte[] before = File.ReadAllBytes(path);
        using GraphIndex replacement = PersistenceSamples.Graph(count: 300);
        using var cancel = new CancellationTokenSource();
        Assert.ThrowsAny<OperationCanceledException>(() => IndexFile.SaveAtomically(replacement, path, stream => new FailingStream(stream, long.MaxValue, (200, cancel)), cancel.Token));
        Assert.Equal(before, File.ReadAllBytes(path));
        Assert.Equal(["index.vkx"], Directory.GetFiles(_folder).Select(Path.GetFileName));
    }

    [Fact]
    public void SavingIntoAMissingFolder_NamesTheTargetAndTheFolder_NotTheTemporaryFile()
    {
        using ExactIndex index = PersistenceSamples.Exact();
        string folder = Path.Combine(_folder, "missing");
        string path = Path.Combine(folder, "index.vkx");
        var e = Assert.Throws<DirectoryNotFoundException>(() => IndexFile.Save(index, path));
        Assert.Equal($"Cannot save the index to '{path}': its folder '{folder}' does not exist. Nothing was written; the previous file, if any, is unchanged.", e.Message);
        Assert.IsType<DirectoryNotFoundException>(e.InnerException);
        Assert.Empty(Directory.GetFileSystemEntries(_folder));
    }

    [Fact]
    public void ARenameThatFails_NamesTheTargetAndTheStep_AndRemovesTheTemporaryFile()
    {
        // The target is a non-empty folder: everything is written, then the rename over it fails.
        string path = Path.Combine(_folder, "index.vkx");
        Directory.CreateDirectory(Path.Combine(path, "inside"));
        using ExactIndex index = PersistenceSamples.Exact();
        var e = Assert.ThrowsAny<IOException>(() => IndexFile.Save(index, path));
        Assert.StartsWith($"Cannot save the index to '{path}': renaming the complete temporary file over it failed: ", e.Message, StringComparison.Ordinal);
        Assert.EndsWith("The previous file, if any, is unchanged; the temporary file was deleted.", e.Message, StringComparison.Ordinal);
        Assert.NotNull(e.InnerException);
        Assert.Equal([path], Directory.GetFileSystemEntries(_folder));
        Assert.True(Directory.Exists(Path.Combine(path, "inside")));
    }

    [Fact]
    public void APathNamingAFolder_IsRejectedBeforeAnythingIsWritten()
    {
        using ExactIndex index = PersistenceSamples.Exact();
        var e = Assert.Throws<ArgumentException>(() => IndexFile.Save(index, _folder + Path.DirectorySeparatorChar));
        Assert.Equal("path", e.ParamName);
        Assert.Contains("names a folder, not a file", e.Message, StringComparison.Ordinal);
        Assert.Empty(Directory.GetFileSystemEntries(_folder));
    }

    [Fact]
    public void AStreamThatFailsPartWay_ReachesTheCallerAsItself_AfterAPrefixThatLoadsAsTruncated()
    {
        using GraphIndex index = PersistenceSamples.Graph(count: 300);
        byte[] full = IndexFileBytes.Save(index);
        foreach (int failAfter in new[] { 0, 5, 16, 100, full.Length / 2, full.Length - 1 })
        {
            var written = new MemoryStream();
            var e = Assert.Throws<IOException>(() => IndexFile.Save(index, new FailingStream(written, failAfter, null)));
            Assert.Equal($"injected failure after {failAfter} bytes", e.Message);
            Assert.Null(e.InnerException);
            byte[] prefix = written.ToArray();
            Assert.Equal(full[..failAfter], prefix);
            IndexFileException rejected = Rejection.Assert(prefix);
            Assert.Contains(failAfter == 0 ? "it has 0 bytes" : "truncated", rejected.Message, StringComparison.Ordinal);
        }
    }

    [Fact]
    public void DeleteTemporaryFiles_RemovesOnlyTheTemporariesOfThatTarget()
    {
        string path = Path.Combine(_folder, "index.vkx");
        using ExactIndex index = PersistenceSamples.Exact();
        IndexFile.Save(index, path);
        string hex = new('a', 16);
        string[] temporaries = [$".index.vkx.{hex}{new string('0', 16)}.tmp", $".index.vkx.0123456789abcdef{hex}.tmp"];
        string[] others =
        [
            $".other.vkx.{hex}{hex}.tmp",               // another target's
            $".index.vkx.{hex}.tmp",                     // too few digits
            $".index.vkx.{hex}{hex}0.tmp",               // too many
            $".index.vkx.{hex.ToUpperInvariant()}{hex}.tmp", // not as the library writes them
            $".index.vkx.{hex}{hex}.tmp.keep",
            $"index.vkx.{hex}{hex}.tmp",
            "notes.txt",
        ];
        foreach (string name in temporaries.Concat(others))
        {
            File.WriteAllBytes(Path.Combine(_folder, name), [1, 2, 3]);
        }

        IReadOnlyList<string> deleted = IndexFile.DeleteTemporaryFiles(path);
        Assert.Equal(temporaries.Select(t => Path.Combine(_folder, t)).Order(StringComparer.Ordinal), deleted);
        Assert.Equal(
            others.Append("index.vkx").Order(StringComparer.Ordinal),
            Directory.GetFiles(_folder).Select(f => Path.GetFileName(f)!).Order(StringComparer.Ordinal));
        using ExactIndex loaded = IndexFile.Load<ExactIndex>(path);
        Assert.Equal(index.Count, loaded.Count);

        Assert.Empty(IndexFile.DeleteTemporaryFiles(path));
        Assert.Empty(IndexFile.DeleteTemporaryFiles(Path.Combine(_folder, "missing", "index.vkx")));
    }

    /// <summary>Passes writes through until a byte budget is spent, then throws (or cancels a token at a given byte count).</summary>
    private sealed class FailingStream(Stream inner, long failAfter, (long At, CancellationTokenSource Source)? cancelAt) : Stream
    {
        private long _written;

        public override bool CanRead => false;

        public override bool CanSeek => false;

        public override bool CanWrite => true;

        public override long Length => throw new NotSupportedException();

        public override long Position
        {
            get => throw new NotSupportedException();
            set => throw new NotSupportedException();
        }

        public override void Write(ReadOnlySpan<byte> buffer)
        {
            if (_written + buffer.Length > failAfter)
            {
                int allowed = (int)(failAfter - _written);
                inner.Write(buffer[..allowed]);
                _written += allowed;
                throw new IOException($"injected failure after {failAfter} bytes");
            }

            inner.Write(buffer);
            _written += buffer.Length;
            if (cancelAt is { } c && _written >= c.At)
            {
                c.Source.Cancel();
            }
        }

        public override void Write(byte[] buffer, int offset, int count) => Write(buffer.AsSpan(offset, count));

        public override void Flush() => inner.Flush();

        public override int Read(byte[] buffer, int offset, int count) => throw new NotSupportedException();

        public override long Seek(long offset, SeekOrigin origin) => throw new NotSupportedException();

        public override void SetLength(long value) => throw new NotSupportedException();
    }
}
