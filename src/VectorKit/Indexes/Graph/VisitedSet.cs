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
/// </remarks>
internal sealed class VisitedSet
{
    private byte[] _stamps = [];
    private byte _generation;

    /// <summary>Forgets every mark and makes room for slots below <paramref name="capacity"/>.</summary>
    public void Begin(int capacity)
    {
        if (_stamps.Length < capacity)
        {
            _stamps = new byte[Math.Max(capacity, _stamps.Length + (_stamps.Length / 2))];
            _generation = 0;
        }

        // A stamp of 0 means never marked: after generation 255 the array is cleared and counting starts again.
        if (++_generation == 0)
        {
            Array.Clear(_stamps);
            _generation = 1;
        }
    }

    /// <summary>Marks a slot; <see langword="false"/> when it was already marked in this walk.</summary>
    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public bool TryMark(int slot)
    {
        ref byte stamp = ref Unsafe.Add(ref MemoryMarshal.GetArrayDataReference(_stamps), (nint)(uint)slot);
        if (stamp == _generation)
        {
            return false;
        }

        stamp = _generation;
        return true;
    }
}
