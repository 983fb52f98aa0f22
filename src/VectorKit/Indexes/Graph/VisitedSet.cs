using System.Runtime.CompilerServices;
using System.Runtime.InteropServices;

namespace VectorKit.Indexes.Graph;

/// <summary>
/// The nodes one graph walk has already seen: one stamp per node slot, compared with a generation number, so starting
/// a new walk is one increment instead of clearing an array.
/// </summary>
internal sealed class VisitedSet
{
    private int[] _stamps = [];
    private int _generation;

    /// <summary>Forgets every mark and makes room for slots below <paramref name="capacity"/>.</summary>
    public void Begin(int capacity)
    {
        if (_stamps.Length < capacity)
        {
            _stamps = new int[Math.Max(capacity, _stamps.Length + (_stamps.Length / 2))];
            _generation = 0;
        }

        if (++_generation == int.MaxValue)
        {
            Array.Clear(_stamps);
            _generation = 1;
        }
    }

    /// <summary>Marks a slot; <see langword="false"/> when it was already marked in this walk.</summary>
    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public bool TryMark(int slot)
    {
        ref int stamp = ref Unsafe.Add(ref MemoryMarshal.GetArrayDataReference(_stamps), (nint)(uint)slot);
        if (stamp == _generation)
        {
            return false;
        }

        stamp = _generation;
        return true;
    }
}
