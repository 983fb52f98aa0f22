using System.Runtime.CompilerServices;

namespace VectorKit.Internal;

/// <summary>
/// One id per row in one contiguous, 64-byte-aligned native block (see <see cref="RowBuffer{T}"/>): the exact index's
/// slot → id table, which a mapped file's <c>Ids</c> section can back in place.
/// </summary>
internal sealed class IdColumn(int initialCapacity) : RowBuffer<long>(1, initialCapacity)
{
    public long this[int slot]
    {
        [MethodImpl(MethodImplOptions.AggressiveInlining)]
        get => Row(slot);
        [MethodImpl(MethodImplOptions.AggressiveInlining)]
        set => Row(slot) = value;
    }
}
