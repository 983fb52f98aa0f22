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

    // A mapped file's sorted lookup, used instead of the table (which then stays empty); read-only.
    private SortedIdLookup? _sorted;

    public IdMap(int capacity = 0) => _slots = new Dictionary<long, int>(capacity, KeyedIdComparer.Instance);

    /// <summary>A read-only map over a mapped file's sorted lookup: writes throw <see cref="InvalidOperationException"/>.</summary>
    public IdMap(SortedIdLookup sorted)
        : this() => _sorted = sorted;

    public int Count => _sorted?.Count ?? _slots.Count;

    /// <summary>Bytes the map holds at its current capacity (a sorted lookup lives in the mapped file: none).</summary>
    public long Bytes => _sorted is null ? (long)_slots.EnsureCapacity(0) * EntryBytes : 0;

    public int this[long id]
    {
        // Callers index only ids they know are present: under a sorted lookup a miss means the file's order is damaged.
        get => _sorted is null ? _slots[id] : _sorted.TryFind(id, out int slot) ? slot : throw new InvalidDataException($"the mapped file's id order does not lead to id {id}, which the file holds: the file is damaged (open it with verification to find out where)");
        set => Writable()[id] = value;
    }

    public bool ContainsKey(long id) => _sorted is null ? _slots.ContainsKey(id) : _sorted.TryFind(id, out _);

    public bool TryGetValue(long id, out int slot) => _sorted is null ? _slots.TryGetValue(id, out slot) : _sorted.TryFind(id, out slot);

    /// <summary>Adds a new id; throws when it is present (callers check first).</summary>
    public void Add(long id, int slot) => Writable().Add(id, slot);

    /// <summary>Adds a new id; false when it is present (loaders turn that into a file error).</summary>
    public bool TryAdd(long id, int slot) => Writable().TryAdd(id, slot);

    public bool Remove(long id) => Writable().Remove(id);

    public bool Remove(long id, out int slot) => Writable().Remove(id, out slot);

    public void EnsureCapacity(int capacity) => Writable().EnsureCapacity(capacity);

    /// <summary>Entries the table holds before it must grow (removed entries' places are reused first).</summary>
    public int Capacity => _sorted is null ? _slots.EnsureCapacity(0) : 0;

    /// <summary>
    /// A copy with room for <paramref name="capacity"/> entries, made while nothing writes to this map (readers may
    /// read it meanwhile), so that a writer can swap it in instead of growing this one under its lock.
    /// </summary>
    public IdMap GrownCopy(int capacity)
    {
        var copy = new IdMap(capacity);
        foreach (KeyValuePair<long, int> entry in Writable())
        {
            copy._slots.Add(entry.Key, entry.Value);
        }

        return copy;
    }

    public void TrimExcess() => _slots.TrimExcess();

    public void Clear()
    {
        // Forgets a sorted lookup too: its memory is about to be unmapped.
        _sorted = null;
        _slots.Clear();
    }

    /// <summary>The ids in ascending order, as a new array (what <c>GetIds</c> returns).</summary>
    public long[] SortedIds()
    {
        if (_sorted is not null)
        {
            return _sorted.SortedIds();
        }

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
            if (ContainsKey(id))
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
            if (!ContainsKey(id))
            {
                ThrowHelper.ThrowIdNotFound(id);
            }
        }
    }

    private Dictionary<long, int> Writable()
        => _sorted is null ? _slots : throw new InvalidOperationException("A mapped file's id lookup is read-only.");
}
