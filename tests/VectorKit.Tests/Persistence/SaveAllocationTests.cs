using VectorKit.Indexes.Graph;
using VectorKit.Persistence;

namespace VectorKit.Tests.Persistence;

/// <summary>
/// A graph's save writes views of the live storage, not copies: what it allocates does not grow with the item count
/// (a copy of the links, ids and flags would be large objects, whose allocation starts full collections).
/// </summary>
public class SaveAllocationTests
{
    [Fact]
    public void AGraphSave_AllocatesNoMoreForTenTimesTheItems()
    {
        using GraphIndex small = PersistenceSamples.Graph(count: 4_000);
        using GraphIndex large = PersistenceSamples.Graph(count: 40_000);
        SavedAllocation(small);
        long smallBytes = SavedAllocation(small);
        long largeBytes = SavedAllocation(large);

        // Copies would add 36,000 × (28 B of links + 8 B id + 2 B level and flag + 12 B of id order), about 1.8 MB.
        Assert.True(largeBytes - smallBytes < 64 * 1024, $"a save allocated {smallBytes:N0} B at 4,000 items and {largeBytes:N0} B at 40,000");
    }

    private static long SavedAllocation(GraphIndex index)
    {
        using var destination = new DiscardingStream();
        long before = GC.GetAllocatedBytesForCurrentThread();
        IndexFile.Save(index, destination);
        long allocated = GC.GetAllocatedBytesForCurrentThread() - before;
        Assert.True(destination.Length > 40L * index.Count, "the save wrote less than the links alone");
        return allocated;
    }

    /// <summary>Counts what is written and keeps none of it.</summary>
    private sealed class DiscardingStream : Stream
    {
        private long _length;

        public override bool CanRead => false;

        public override bool CanSeek => false;

        public override bool CanWrite => true;

        public override long Length => _length;

        public override long Position
        {
            get => _length;
            set => throw new NotSupportedException();
        }

        public override void Write(byte[] buffer, int offset, int count) => _length += count;

        public override void Write(ReadOnlySpan<byte> buffer) => _length += buffer.Length;

        public override void Flush()
        {
        }

        public override int Read(byte[] buffer, int offset, int count) => throw new NotSupportedException();

        public override long Seek(long offset, SeekOrigin origin) => throw new NotSupportedException();

        public override void SetLength(long value) => throw new NotSupportedException();
    }
}
