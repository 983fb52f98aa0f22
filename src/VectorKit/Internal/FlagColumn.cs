using System.Runtime.CompilerServices;

namespace VectorKit.Internal;

/// <summary>
/// One byte per row in one contiguous native block (see <see cref="RowBuffer{T}"/>): the graph's per-slot removal
/// flags, which a mapped file's <c>RemovedFlags</c> section can back in place.
/// </summary>
internal sealed class FlagColumn(int initialCapacity) : RowBuffer<byte>(1, initialCapacity)
{
    public byte this[int slot]
    {
        [MethodImpl(MethodImplOptions.AggressiveInlining)]
        get => Row(slot);
        [MethodImpl(MethodImplOptions.AggressiveInlining)]
        set => Row(slot) = value;
    }
}
