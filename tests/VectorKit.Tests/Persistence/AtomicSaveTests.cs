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
            Assert.Equal($"injected failure after {failAfter} bytes", e.Message);
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
    public void SavingIntoAMissingFolder_FailsAndCreatesNothing()
    {
        using ExactIndex index = PersistenceSamples.Exact();
        Assert.Throws<DirectoryNotFoundException>(() => IndexFile.Save(index, Path.Combine(_folder, "missing", "index.vkx")));
        Assert.Empty(Directory.GetFileSystemEntries(_folder));
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
