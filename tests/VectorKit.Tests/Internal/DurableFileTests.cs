using VectorKit.Internal;

namespace VectorKit.Tests.Internal;

/// <summary>
/// <see cref="DurableFile"/>, the one way the library replaces a file: the target appears only complete, a failure or
/// an abandoned write leaves the previous file byte for byte and no temporary file, and errors name the target.
/// </summary>
public sealed class DurableFileTests : IDisposable
{
    private static readonly byte[] Previous = [7, 7, 7, 1, 2, 3];
    private readonly string _folder = Directory.CreateTempSubdirectory("vk-durable-").FullName;

    public void Dispose() => Directory.Delete(_folder, recursive: true);

    [Fact]
    public void AWriteThatFailsPartWay_LeavesThePreviousFile_AndNoTemporary_AndNamesTheTarget()
    {
        string path = Path.Combine(_folder, "rentals.bin");
        byte[] data = Enumerable.Range(0, 10_000).Select(i => (byte)(i * 31)).ToArray();
        foreach (int failAfter in new[] { 0, 1, 4096, 9_999 })
        {
            File.WriteAllBytes(path, Previous);
            var e = Assert.Throws<IOException>(() =>
            {
                using DurableFile file = DurableFile.Begin(path, "path", "write", bufferSize: 0, stream => new FailAfter(stream, failAfter));
                file.Write(stream => stream.Write(data));
                file.Commit();
            });
            Assert.Equal(
                $"Cannot write '{path}': writing the temporary file failed: failed after {failAfter} bytes. The previous file, if any, is unchanged; the temporary file was deleted.",
                e.Message);
            Assert.Equal($"failed after {failAfter} bytes", e.InnerException?.Message);
            Assert.Equal(Previous, File.ReadAllBytes(path));
            Assert.Equal([path], Directory.GetFiles(_folder));
        }
    }

    [Fact]
    public void AWriteAbandonedWithoutCommit_LeavesThePreviousFile_OrNoFile()
    {
        string path = Path.Combine(_folder, "rentals.bin");
        using (DurableFile file = DurableFile.Begin(path, "path", "write"))
        {
            file.Stream.Write([1, 2, 3]);
            Assert.True(File.Exists(file.TemporaryPath));
            Assert.True(DurableFile.IsTemporaryFor(Path.GetFileName(file.TemporaryPath), "rentals.bin"));
            Assert.False(File.Exists(path));
        }

        Assert.Empty(Directory.GetFiles(_folder));

        File.WriteAllBytes(path, Previous);
        using (DurableFile file = DurableFile.Begin(path, "path", "write"))
        {
            file.FlushToDisk();
        }

        Assert.Equal(Previous, File.ReadAllBytes(path));
        Assert.Equal([path], Directory.GetFiles(_folder));
    }

    [Fact]
    public void ACommittedWrite_ReplacesTheFile_AndLeavesNoTemporary()
    {
        string path = Path.Combine(_folder, "rentals.bin");
        File.WriteAllBytes(path, Previous);
        DurableFile.Replace(path, "path", "write", bufferSize: 4096, stream => stream.Write([9, 8]));
        Assert.Equal(new byte[] { 9, 8 }, File.ReadAllBytes(path));
        Assert.Equal([path], Directory.GetFiles(_folder));
    }

    [Fact]
    public void ACancellationBeforeTheRename_LeavesThePreviousFile()
    {
        string path = Path.Combine(_folder, "rentals.bin");
        File.WriteAllBytes(path, Previous);
        using var cancel = new CancellationTokenSource();
        cancel.Cancel();
        using (DurableFile file = DurableFile.Begin(path, "path", "write"))
        {
            file.Write(stream => stream.Write([9, 8]));
            Assert.Throws<OperationCanceledException>(() => file.Commit(cancel.Token));
        }

        Assert.Equal(Previous, File.ReadAllBytes(path));
        Assert.Equal([path], Directory.GetFiles(_folder));
    }

    [Fact]
    public void FlushingAFolder_Succeeds_AndAMissingFolderFailsNamingIt()
    {
        // Durability itself cannot be observed without cutting the power; this shows the native calls run and report errors.
        FolderFlush.Flush(_folder);
        string missing = Path.Combine(_folder, "missing");
        if (OperatingSystem.IsWindows())
        {
            FolderFlush.Flush(missing);
            return;
        }

        var e = Assert.Throws<IOException>(() => FolderFlush.Flush(missing));
        Assert.StartsWith($"opening the folder '{missing}' failed: ", e.Message, StringComparison.Ordinal);
        Assert.Contains("No such file or directory", e.Message, StringComparison.Ordinal);
    }

    /// <summary>Passes writes through until a byte budget is spent, then throws.</summary>
    private sealed class FailAfter(Stream inner, long budget) : Stream
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
            int allowed = (int)Math.Min(buffer.Length, budget - _written);
            inner.Write(buffer[..allowed]);
            _written += allowed;
            if (allowed < buffer.Length)
            {
                throw new IOException($"failed after {budget} bytes");
            }
        }

        public override void Write(byte[] buffer, int offset, int count) => Write(buffer.AsSpan(offset, count));

        public override void Flush() => inner.Flush();

        public override int Read(byte[] buffer, int offset, int count) => throw new NotSupportedException();

        public override long Seek(long offset, SeekOrigin origin) => throw new NotSupportedException();

        public override void SetLength(long value) => throw new NotSupportedException();
    }
}
