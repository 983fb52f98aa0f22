using System.Buffers;

namespace VectorKit.Internal;

/// <summary>
/// A <see cref="Memory{T}"/> over native memory this view does not own (a row block, a column), so that code written
/// for memory can read it without a copy. Valid only while the owner keeps the block where it is.
/// </summary>
internal sealed unsafe class NativeMemoryView<T>(T* start, int length) : MemoryManager<T>
    where T : unmanaged
{
    public override Span<T> GetSpan() => new(start, length);

    // Native memory never moves: nothing to pin.
    public override MemoryHandle Pin(int elementIndex = 0) => new(start + elementIndex);

    public override void Unpin()
    {
    }

    protected override void Dispose(bool disposing)
    {
    }
}
