using System.Runtime.CompilerServices;

namespace VectorKit.Internal;

/// <summary>
/// One value per row in one contiguous native block (see <see cref="RowBuffer{T}"/>), read and written by row number:
/// a per-slot table that a mapped file's section can back in place (the graph's removal flags, and ids through
/// <see cref="IdColumn"/>).
/// </summary>
internal class Column<T>(int initialCapacity) : RowBuffer<T>(1, initialCapacity)
    where T : unmanaged
{
    public T this[int slot]
    {
        [MethodImpl(MethodImplOptions.AggressiveInlining)]
        get => Row(slot);
        [MethodImpl(MethodImplOptions.AggressiveInlining)]
        set => Row(slot) = value;
    }
}
