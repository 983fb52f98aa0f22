using System.Runtime.CompilerServices;
using System.Runtime.InteropServices;
using VectorKit.Internal;

namespace VectorKit.Indexes.Graph;

/// <summary>
/// The links of every node on every layer, in flat int arrays: no object or list per node.
/// </summary>
/// <remarks>
/// <para><b>Layout.</b> A link list is a block of <c>limit + 1</c> ints: the count, then the neighbour slots.
/// The bottom layer (every node) is one array of <c>capacity × (bottomLimit + 1)</c> ints, block of slot <c>s</c> at
/// <c>s × (bottomLimit + 1)</c>. Upper layers exist only for nodes whose level is at least 1: such a node owns
/// <c>level × (upperLimit + 1)</c> consecutive ints of a second array, layer <c>ℓ</c> at
/// <c>start + (ℓ − 1) × (upperLimit + 1)</c>; with the published level distribution that is about
/// <c>1 / (links − 1)</c> of the nodes.</para>
/// <para><b>In-degrees.</b> Every list also has a count of the lists that name it (its in-degree on that layer), kept by
/// whoever writes a list, with interlocked updates. Removal finds the lists to repair by walking near the removed node
/// until it has found that many, instead of scanning every list; the bottom-layer count says at once when a node has
/// lost its last in-link.</para>
/// <para><b>Concurrency.</b> Writers of one list hold that node's lock and write the count last; readers do not lock.
/// A reader can therefore see a list mid-rewrite, but every slot it reads is a valid, fully stored node, and a count
/// never exceeds the limit. Growth (<see cref="EnsureCapacity"/>) requires that nobody else uses the links.</para>
/// <para><b>Memory.</b> The arrays are native blocks (<see cref="Column{T}"/>), not managed arrays: at millions of nodes
/// they would be large objects, whose allocation (by every growth, rebuild and copy) starts full collections that
/// pause every thread. <see cref="Dispose"/> frees them; the owner does so once no reader can still use them.</para>
/// </remarks>
internal sealed unsafe class GraphLinks : IDisposable
{
    // The count-only list a mapped graph reads for a layer above a node's level, and for a node whose level or start
    // a damaged file gives an impossible value.
    private static readonly int[] s_noLinks = [0];

    // A mapped file's sections, read in place (null in memory): every node's bottom-layer block, the levels, and the
    // upper layers' blocks at the starts in _mappedStarts (the file's column, or _ownedStarts built at open for a file
    // that predates it). Nothing per node is copied, so that opening does not grow with the node count.
    private int* _mappedBottom;
    private int* _mappedUpper;
    private byte* _mappedLevels;
    private int* _mappedStarts;
    private long _mappedUpperInts;
    private int _mappedMaxLevel;
    private int[]? _ownedStarts;
    private int _capacity;
    private Column<int> _bottom = new(0);
    private Column<int> _upperStart = new(0);
    private Column<byte> _levels = new(0);
    private Column<int> _upper = new(0);
    private int _upperUsed;
    private Column<int> _inBottom = new(0);
    private Column<int> _inUpper = new(0);

    public GraphLinks(int upperLimit, int bottomLimit)
    {
        UpperLimit = upperLimit;
        BottomLimit = bottomLimit;
    }

    /// <summary>
    /// Read-only links over a mapped file's sections, none of them copied: <paramref name="bottom"/> holds
    /// <paramref name="slots"/> blocks of <c>bottomLimit + 1</c> ints, <paramref name="levels"/> one level per slot,
    /// <paramref name="upper"/> the upper-layer blocks in slot order (the file's layout), <paramref name="upperInts"/> ints,
    /// and <paramref name="starts"/> where each slot's blocks begin in it. Every read of an upper layer is range-checked
    /// against these (a level above <paramref name="maxLevel"/>, or blocks that would run past the section, read as a
    /// node without upper layers), so unverified values cannot send a read outside the section; the bottom layer needs
    /// no check (its blocks are fixed by the slot count). A file without starts (<paramref name="starts"/> null, format
    /// version 5 and older) has them built here, with its levels checked: 4 bytes and one pass per node. No in-degrees:
    /// such links are never written.
    /// </summary>
    /// <exception cref="InvalidDataException">Only when <paramref name="starts"/> is null: a level exceeds <paramref name="maxLevel"/>, or the levels call for another number of upper-layer ints.</exception>
    public static GraphLinks Mapped(int upperLimit, int bottomLimit, int slots, byte* levels, int* starts, int maxLevel, int* bottom, int* upper, long upperInts)
    {
        var links = new GraphLinks(upperLimit, bottomLimit)
        {
            _capacity = slots,
            _mappedBottom = bottom,
            _mappedUpper = upper,
            _mappedLevels = levels,
            _mappedStarts = starts,
            _mappedUpperInts = upperInts,
            _mappedMaxLevel = maxLevel,
        };
        if (starts != null)
        {
            return links;
        }

        // Pinned, so that both kinds of file are read through one pointer.
        int[] built = GC.AllocateUninitializedArray<int>(slots, pinned: true);
        long at = 0;
        int upperStride = upperLimit + 1;
        for (int slot = 0; slot < slots; slot++)
        {
            int level = levels[slot];
            if (level > maxLevel)
            {
                throw new InvalidDataException($"slot {slot} has level {level}; the most is {maxLevel}");
            }

            built[slot] = (int)Math.Min(at, int.MaxValue);
            at += (long)level * upperStride;
        }

        if (at != upperInts)
        {
            throw new InvalidDataException($"the upper-layer links hold {upperInts} ints; the levels require {at}");
        }

        links._ownedStarts = built;
        links._mappedStarts = (int*)Unsafe.AsPointer(ref MemoryMarshal.GetArrayDataReference(built));
        return links;
    }

    public int UpperLimit { get; }

    public int BottomLimit { get; }

    /// <summary>The larger of the two limits: the most neighbours any one list holds.</summary>
    public int MaxLimit => Math.Max(UpperLimit, BottomLimit);

    public int Capacity => _capacity;

    public long Bytes =>
        _bottom.Bytes + _upperStart.Bytes + _upper.Bytes + _inBottom.Bytes + _inUpper.Bytes + _levels.Bytes + ((long)(_ownedStarts?.Length ?? 0) * sizeof(int));

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public int Limit(int level) => level == 0 ? BottomLimit : UpperLimit;

    /// <summary>Grows every per-node array to at least <paramref name="capacity"/> nodes; caller excludes all other users.</summary>
    public void EnsureCapacity(int capacity)
    {
        if (capacity <= Capacity)
        {
            return;
        }

        int grown = (int)Math.Min(Array.MaxLength / (BottomLimit + 1), Math.Max(capacity, Capacity + ((long)Capacity / 2)));
        Grow(_bottom, checked(grown * (BottomLimit + 1)));
        Grow(_upperStart, grown);
        Grow(_levels, grown);
        Grow(_inBottom, grown);
        _capacity = grown;
    }

    // Resizes a column to `length` elements, keeping its contents and zeroing the new ones (which touches their pages).
    private static void Grow<T>(Column<T> column, int length)
        where T : unmanaged
    {
        int old = column.Capacity;
        column.Resize(length);
        if (length > old)
        {
            column.ClearRows(old, length - old);
        }
    }

    // A zeroed column of `length` elements with the first `kept` of `source`.
    private static Column<T> CopyOf<T>(Column<T> source, int kept, int length)
        where T : unmanaged
    {
        var copy = new Column<T>(length);
        source.Rows(kept).CopyTo(copy.Rows(kept));
        copy.ClearRows(kept, length - kept);
        return copy;
    }

    /// <summary>
    /// A copy with every per-node array grown to <paramref name="capacity"/> nodes, links, levels and in-degrees kept,
    /// for growth beside readers (they keep reading this one until the owner swaps); caller excludes every writer.
    /// </summary>
    public GraphLinks GrownCopy(int capacity)
    {
        int upperRoom = UpperRoom(capacity);
        int upperStride = UpperLimit + 1;
        var copy = new GraphLinks(UpperLimit, BottomLimit) { _upperUsed = _upperUsed, _capacity = capacity };
        copy.ReplaceColumns(
            CopyOf(_bottom, checked(_capacity * (BottomLimit + 1)), checked(capacity * (BottomLimit + 1))),
            CopyOf(_upperStart, _capacity, capacity),
            CopyOf(_levels, _capacity, capacity),
            CopyOf(_upper, _upperUsed, upperRoom),
            CopyOf(_inBottom, _capacity, capacity),
            CopyOf(_inUpper, _upperUsed / upperStride, upperRoom / upperStride));
        return copy;
    }

    // Upper-layer room for `capacity` nodes at the share of them that have upper layers so far, so that adds into
    // the room of a growth rarely grow the upper layers themselves (InitNode does, under the owner's write lock).
    private int UpperRoom(int capacity)
    {
        long proportional = _capacity == 0 ? 0 : (long)_upperUsed * capacity / _capacity;
        int stride = UpperLimit + 1;
        long room = Math.Max(_upper.Capacity, proportional + (64L * stride));
        return (int)Math.Min(Array.MaxLength / stride * stride, room / stride * stride);
    }

    /// <summary>
    /// The levels and lists of slots [0, <paramref name="slots"/>) in a file's layout, without a copy: the bottom
    /// layer's blocks and, when the nodes own their upper-layer blocks in slot order (as adds, loads and compactions
    /// give them out), the upper layers' blocks. False for mapped links or another order; caller excludes every writer.
    /// </summary>
    public bool TryViewInFileLayout(int slots, out ReadOnlyMemory<byte> levels, out ReadOnlyMemory<int> bottom, out ReadOnlyMemory<int> upper)
    {
        (levels, bottom, upper) = (default, default, default);
        if (_mappedBottom != null)
        {
            return false;
        }

        int upperStride = UpperLimit + 1;
        long at = 0;
        for (int slot = 0; slot < slots; slot++)
        {
            int level = _levels[slot];
            if (level > 0 && _upperStart[slot] != at)
            {
                return false;
            }

            at += (long)level * upperStride;
        }

        levels = _levels.RowsMemory(slots);
        bottom = _bottom.RowsMemory(checked(slots * (BottomLimit + 1)));
        upper = _upper.RowsMemory((int)at);
        return true;
    }

    /// <summary>Shrinks to exactly <paramref name="capacity"/> nodes and forgets every link; caller excludes all other users.</summary>
    public void Reset(int capacity)
    {
        ReplaceColumns(
            CopyOf(_bottom, 0, checked(capacity * (BottomLimit + 1))),
            CopyOf(_upperStart, 0, capacity),
            CopyOf(_levels, 0, capacity),
            new Column<int>(0),
            CopyOf(_inBottom, 0, capacity),
            new Column<int>(0));
        _upperUsed = 0;
        _capacity = capacity;
    }

    /// <summary>Frees the native blocks (a mapped file's sections are not owned: untouched); nothing may use the links after.</summary>
    public void Dispose()
    {
        ReplaceColumns(new(0), new(0), new(0), new(0), new(0), new(0));
        _upperUsed = 0;
        _capacity = 0;
    }

    private void ReplaceColumns(Column<int> bottom, Column<int> upperStart, Column<byte> levels, Column<int> upper, Column<int> inBottom, Column<int> inUpper)
    {
        (Column<int> oldBottom, Column<int> oldStarts, Column<byte> oldLevels, Column<int> oldUpper, Column<int> oldInBottom, Column<int> oldInUpper) =
            (_bottom, _upperStart, _levels, _upper, _inBottom, _inUpper);
        (_bottom, _upperStart, _levels, _upper, _inBottom, _inUpper) = (bottom, upperStart, levels, upper, inBottom, inUpper);
        oldBottom.Dispose();
        oldStarts.Dispose();
        oldLevels.Dispose();
        oldUpper.Dispose();
        oldInBottom.Dispose();
        oldInUpper.Dispose();
    }

    /// <summary>Gives a new slot its level and empty lists on every layer; caller excludes all other users.</summary>
    public void InitNode(int slot, int level)
    {
        _levels[slot] = (byte)level;
        _bottom[slot * (BottomLimit + 1)] = 0;
        _inBottom[slot] = 0;
        if (level > 0)
        {
            int length = checked(level * (UpperLimit + 1));
            if (_upperUsed + length > _upper.Capacity)
            {
                int stride = UpperLimit + 1;
                long room = Math.Max(checked(_upperUsed + length), _upper.Capacity + (_upper.Capacity / 2) + (64L * stride));
                Grow(_upper, (int)Math.Min(Array.MaxLength / stride * stride, room / stride * stride));
                Grow(_inUpper, _upper.Capacity / stride);
            }

            _upperStart[slot] = _upperUsed;
            _upper.ClearRows(_upperUsed, length);
            _inUpper.ClearRows(_upperUsed / (UpperLimit + 1), level);
            _upperUsed += length;
        }
    }

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public int Level(int slot) => _mappedLevels != null ? MappedLevel(slot) : _levels[slot];

    // A mapped node's level when its blocks lie inside the upper-layer section, else 0 (only a damaged file has such a
    // node; it then reads as a node of the bottom layer alone, on every path alike).
    private int MappedLevel(int slot)
    {
        if ((uint)slot >= (uint)_capacity)
        {
            return 0;
        }

        int level = _mappedLevels[slot];
        if (level == 0 || level > _mappedMaxLevel)
        {
            return 0;
        }

        long start = _mappedStarts[slot];
        return start >= 0 && start + ((long)level * (UpperLimit + 1)) <= _mappedUpperInts ? level : 0;
    }

    /// <summary>The list of <paramref name="slot"/> on <paramref name="level"/>: element 0 is the count, then the neighbours.</summary>
    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public Span<int> Block(int slot, int level)
    {
        if (level == 0)
        {
            int stride = BottomLimit + 1;
            return _mappedBottom != null
                ? new Span<int>(_mappedBottom + ((nint)slot * stride), stride)
                : MemoryMarshal.CreateSpan(ref _bottom.Row(slot * stride), stride);
        }

        if (_mappedUpper != null)
        {
            return MappedUpperBlock(slot, level);
        }

        int upperStride = UpperLimit + 1;
        return MemoryMarshal.CreateSpan(ref _upper.Row(_upperStart[slot] + ((level - 1) * upperStride)), upperStride);
    }

    // A mapped node's list on an upper layer; a layer the node lacks (or that would lie outside the section) reads as
    // empty. Not inlined: the checks stay out of the walks that inline Block, whose bottom layer never comes here.
    [MethodImpl(MethodImplOptions.NoInlining)]
    private Span<int> MappedUpperBlock(int slot, int level)
    {
        int upperStride = UpperLimit + 1;
        return level <= MappedLevel(slot) ? new Span<int>(_mappedUpper + _mappedStarts[slot] + ((nint)(level - 1) * upperStride), upperStride) : s_noLinks;
    }

    /// <summary>How many lists on <paramref name="level"/> name <paramref name="slot"/>; update it with interlocked operations.</summary>
    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public ref int InDegree(int slot, int level)
    {
        return ref level == 0
            ? ref _inBottom.Row(slot)
            : ref _inUpper.Row((_upperStart[slot] / (UpperLimit + 1)) + level - 1);
    }

    /// <summary>The neighbour count of a list, read once, never more than the limit even mid-rewrite.</summary>
    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static int CountOf(Span<int> block) => Math.Min(Volatile.Read(ref block[0]), block.Length - 1);
}
