namespace VectorKit.Internal;

/// <summary>
/// The id → slot map every index kind keeps: one implementation, so how ids are hashed, listed and counted in memory is
/// decided in one place. Ids are hashed with a per-process key (<see cref="KeyedIdComparer"/>), so ids read from an
/// untrusted file cannot be chosen to collide.
/// </summary>
/// <remarks>Not thread-safe on its own: the owning index serializes writers against readers.</remarks>
internal sealed class IdMap
{
    // Bytes per entry of the underlying hash table (key, value, hash code, next index, bucket), for MemoryBytes.
    private const int EntryBytes = 28;

    private readonly Dictionary<long, int> _slots;

    public IdMap(int capacity = 0) => _slots = new Dictionary<long, int>(capacity, KeyedIdComparer.Instance);

    public int Count => _slots.Count;

    /// <summary>Bytes the map holds at its current capacity.</summary>
    public long Bytes => (long)_slots.EnsureCapacity(0) * EntryBytes;

    public int this[long id]
    {
        get => _slots[id];
        set => _slots[id] = value;
    }

    public bool ContainsKey(long id) => _slots.ContainsKey(id);

    public bool TryGetValue(long id, out int slot) => _slots.TryGetValue(id, out slot);

    /// <summary>Adds a new id; throws when it is present (callers check first).</summary>
    public void Add(long id, int slot) => _slots.Add(id, slot);

    /// <summary>Adds a new id; false when it is present (loaders turn that into a file error).</summary>
    public bool TryAdd(long id, int slot) => _slots.TryAdd(id, slot);

    public bool Remove(long id) => _slots.Remove(id);

    public bool Remove(long id, out int slot) => _slots.Remove(id, out slot);

    public void EnsureCapacity(int capacity) => _slots.EnsureCapacity(capacity);

    public void TrimExcess() => _slots.TrimExcess();

    public void Clear() => _slots.Clear();

    /// <summary>The ids in ascending order, as a new array (what <c>GetIds</c> returns).</summary>
    public long[] SortedIds()
    {
        long[] ids = new long[_slots.Count];
        _slots.Keys.CopyTo(ids, 0);
        Array.Sort(ids);
        return ids;
    }

    /// <summary>Throws <see cref="ArgumentException"/> on the first id of <paramref name="ids"/> already present.</summary>
    public void CheckAbsent(ReadOnlySpan<long> ids, string paramName)
    {
        foreach (long id in ids)
        {
            if (_slots.ContainsKey(id))
            {
                ThrowHelper.ThrowDuplicateId(paramName, id);
            }
        }
    }

    /// <summary>Throws <see cref="KeyNotFoundException"/> on the first id of <paramref name="ids"/> not present.</summary>
    public void CheckPresent(ReadOnlySpan<long> ids)
    {
        foreach (long id in ids)
        {
            if (!_slots.ContainsKey(id))
            {
                ThrowHelper.ThrowIdNotFound(id);
            }
        }
    }
}
