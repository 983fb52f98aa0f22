using System.Runtime.CompilerServices;
using System.Runtime.InteropServices;

namespace VectorKit.Indexes.Graph;

/// <summary>
/// The nodes one graph walk has already seen: one stamp per node slot, compared with a generation number, so starting
/// a new walk is one increment instead of clearing an array.
/// </summary>
/// <remarks>
/// Stamps are single bytes: a walk tests a stamp for every neighbour it meets, in no predictable order, so the array
/// should stay in the nearer caches (a quarter of the size of int stamps); the price is clearing it once every 255 walks.
/// The stamps are native memory: the first walk after the graph grows allocates a larger block, and a managed array of
/// that size would come from the large-object heap, whose allocations wait while another thread allocates a large
/// block there (a growing graph's links), so a search would wait for a write. Freed by the finalizer (sets live as
/// long as the thread that owns them).
/// </remarks>
internal sealed unsafe class VisitedSet
{
    private byte* _stamps;
    private int _length;
    private byte _generation;

    ~VisitedSet() => NativeMemory.Free(_stamps);

    /// <summary>Forgets every mark and makes room for slots below <paramref name="capacity"/>.</summary>
    public void Begin(int capacity)
    {
        if (_length < capacity)
        {
            int length = Math.Max(capacity, _length + (_length / 2));
            byte* grown = (byte*)NativeMemory.AllocZeroed((nuint)length);
            NativeMemory.Free(_stamps);
            _stamps = grown;
            _length = length;
            _generation = 0;
        }

        // A stamp of 0 means never marked: after generation 255 the stamps are cleared and counting starts again.
        if (++_generation == 0)
        {
            new Span<byte>(_stamps, _length).Clear();
            _generation = 1;
        }
    }

    /// <summary>Marks a slot; <see langword="false"/> when it was already marked in this walk.</summary>
    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public bool TryMark(int slot)
    {
        byte* stamp = _stamps + (uint)slot;
        if (*stamp == _generation)
        {
            return false;
        }

        *stamp = _generation;
        return true;
    }
}
