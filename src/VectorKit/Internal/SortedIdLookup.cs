namespace VectorKit.Internal;

/// <summary>
/// Finds an id's row by binary search over a mapped file's rows ordered by ascending id (the exact index's
/// <c>IdOrder</c> section) and its slot → id column: no table of N entries is built when a file is opened.
/// </summary>
/// <remarks>
/// Every row number read from the order is checked against the row count before it is used, so a damaged or crafted
/// order can never make a lookup read outside the mapped ids. An order that is in range but not sorted can make a
/// lookup miss an id that is present (a found row is always right: its id was compared); <see cref="Verify"/> rules
/// that out in one pass. Immutable, so thread-safe; the owner keeps the memory mapped while it is used.
/// </remarks>
internal sealed unsafe class SortedIdLookup
{
    private readonly long* _ids;
    private readonly int* _order;
    private readonly int _count;
    private readonly int _rows;

    // Per row, non-zero when removed (the graph's flags; null when every row is live): the order lists live rows only.
    private readonly byte* _removed;

    /// <summary>A lookup over <paramref name="count"/> ordered rows among <paramref name="rows"/> (all of them unless some are flagged in <paramref name="removed"/>).</summary>
    public SortedIdLookup(long* ids, int* order, int count, int rows, byte* removed = null)
    {
        _ids = ids;
        _order = order;
        _count = count;
        _rows = rows;
        _removed = removed;
    }

    public int Count => _count;

    public bool TryFind(long id, out int slot)
    {
        int lo = 0;
        int hi = _count - 1;
        while (lo <= hi)
        {
            int mid = lo + ((hi - lo) >> 1);
            int row = RowAt(mid);
            long at = _ids[row];
            if (at == id)
            {
                // A removed row named by an unverified order is not an answer.
                slot = row;
                return _removed == null || _removed[row] == 0;
            }

            if (at < id)
            {
                lo = mid + 1;
            }
            else
            {
                hi = mid - 1;
            }
        }

        slot = -1;
        return false;
    }

    /// <summary>Every id, ascending, as a new array; sorted here rather than read in the file's order, so an unverified file cannot hand out an unsorted list.</summary>
    public long[] SortedIds()
    {
        long[] ids;
        if (_removed == null)
        {
            ids = new ReadOnlySpan<long>(_ids, _count).ToArray();
        }
        else
        {
            ids = new long[_count];
            for (int i = 0; i < _count; i++)
            {
                ids[i] = _ids[RowAt(i)];
            }
        }

        Array.Sort(ids);
        return ids;
    }

    /// <summary>
    /// Checks that the order names every row once by strictly ascending id: in range, sorted, and (strictness) with
    /// unique ids, which makes it a permutation. Throws <see cref="InvalidDataException"/> naming the first fault.
    /// </summary>
    public void Verify()
    {
        for (int i = 0; i < _count; i++)
        {
            int row = RowAt(i);
            if (_removed != null && _removed[row] != 0)
            {
                throw new InvalidDataException($"the id order names row {row} at position {i}, which is removed; it lists live rows only");
            }

            if (i > 0 && _ids[_order[i - 1]] >= _ids[row])
            {
                throw new InvalidDataException(
                    $"the id order is not strictly ascending at position {i}: row {_order[i - 1]} has id {_ids[_order[i - 1]]}, row {row} id {_ids[row]} (ids must be unique)");
            }
        }
    }

    private int RowAt(int position)
    {
        int row = _order[position];
        if ((uint)row >= (uint)_rows)
        {
            throw new InvalidDataException($"the id order names row {row} at position {position}; the file has {_rows} rows");
        }

        return row;
    }
}
