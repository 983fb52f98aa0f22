namespace VectorKit.Indexes.InvertedFile;

/// <summary>
/// The lists of an inverted file read in place from a mapped file: every list's codes (one code after another, or
/// fast-scan blocks) and its ids, list after list, found through two small per-list tables of starts.
/// </summary>
/// <remarks>
/// The starts are prefix sums of list lengths that the opener has checked to add up to the entry count, and the
/// sections' lengths were checked against that count, so every list's codes and ids lie inside their sections: a
/// search never reads outside the mapping whatever the bulk bytes hold. Immutable, so thread-safe; the owning index
/// keeps the memory mapped while it is used.
/// </remarks>
internal sealed unsafe class MappedLists
{
    private readonly byte* _codes;
    private readonly long* _ids;
    private readonly long[] _byteStart;
    private readonly int[] _entryStart;

    /// <param name="codes">The first code byte of list 0.</param>
    /// <param name="ids">The first id, entries in list order.</param>
    /// <param name="lengths">Entries per list (non-negative, adding up to the entries the sections hold).</param>
    /// <param name="listBytes">The bytes a list of a given length takes in the codes section.</param>
    public MappedLists(byte* codes, long* ids, ReadOnlySpan<int> lengths, Func<int, long> listBytes)
    {
        _codes = codes;
        _ids = ids;
        _byteStart = new long[lengths.Length + 1];
        _entryStart = new int[lengths.Length + 1];
        for (int list = 0; list < lengths.Length; list++)
        {
            _byteStart[list + 1] = checked(_byteStart[list] + listBytes(lengths[list]));
            _entryStart[list + 1] = checked(_entryStart[list] + lengths[list]);
        }
    }

    /// <summary>Bytes of the two tables.</summary>
    public long Bytes => ((long)_byteStart.Length * sizeof(long)) + ((long)_entryStart.Length * sizeof(int));

    /// <summary>The codes of <paramref name="list"/> (the opener refuses a list longer than a span).</summary>
    public ReadOnlySpan<byte> Codes(int list) => new(_codes + _byteStart[list], (int)(_byteStart[list + 1] - _byteStart[list]));

    /// <summary>The id of entry <paramref name="position"/> of <paramref name="list"/>; the position is below the list's length.</summary>
    public long Id(int list, int position) => _ids[_entryStart[list] + position];

    /// <summary>The list and position of <paramref name="slot"/>, an entry's number in list order.</summary>
    public (int List, int Position) Locate(int slot)
    {
        // The last list starting at or before the slot that is not empty: the first start above it, minus one.
        int lo = 0, hi = _entryStart.Length - 1;
        while (lo < hi)
        {
            int mid = lo + ((hi - lo) >> 1);
            if (_entryStart[mid] <= slot)
            {
                lo = mid + 1;
            }
            else
            {
                hi = mid;
            }
        }

        int list = lo - 1;
        return (list, slot - _entryStart[list]);
    }
}
