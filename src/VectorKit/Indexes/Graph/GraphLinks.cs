using System.Runtime.CompilerServices;
using System.Runtime.InteropServices;

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
/// </remarks>
internal sealed unsafe class GraphLinks
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
    private int[] _bottom = [];
    private int[] _upperStart = [];
    private byte[] _levels = [];
    private int[] _upper = [];
    private int _upperUsed;
    private int[] _inBottom = [];
    private int[] _inUpper = [];

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
        ((long)(_bottom.Length + _upperStart.Length + _upper.Length + _inBottom.Length + _inUpper.Length + (_ownedStarts?.Length ?? 0)) * sizeof(int)) + _levels.Length;

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
        Array.Resize(ref _bottom, checked(grown * (BottomLimit + 1)));
        Array.Resize(ref _upperStart, grown);
        Array.Resize(ref _levels, grown);
        Array.Resize(ref _inBottom, grown);
        _capacity = grown;
    }

    /// <summary>
    /// A copy with every per-node array grown to <paramref name="capacity"/> nodes, links, levels and in-degrees kept,
    /// for growth beside readers (they keep reading this one until the owner swaps); caller excludes every writer.
    /// </summary>
    public GraphLinks GrownCopy(int capacity)
    {
        int upperRoom = UpperRoom(capacity);
        var copy = new GraphLinks(UpperLimit, BottomLimit)
        {
            _bottom = new int[checked(capacity * (BottomLimit + 1))],
            _upperStart = new int[capacity],
            _levels = new byte[capacity],
            _inBottom = new int[capacity],
            _upper = new int[upperRoom],
            _inUpper = new int[upperRoom / (UpperLimit + 1)],
            _upperUsed = _upperUsed,
            _capacity = capacity,
        };
        _bottom.CopyTo(copy._bottom, 0);
        _upper.AsSpan(0, _upperUsed).CopyTo(copy._upper);
        _inUpper.AsSpan(0, _upperUsed / (UpperLimit + 1)).CopyTo(copy._inUpper);
        _upperStart.CopyTo(copy._upperStart, 0);
        _levels.CopyTo(copy._levels, 0);
        _inBottom.CopyTo(copy._inBottom, 0);
        return copy;
    }

    // Upper-layer room for `capacity` nodes at the share of them that have upper layers so far, so that adds into
    // the room of a growth rarely grow the upper layers themselves (InitNode does, under the owner's write lock).
    private int UpperRoom(int capacity)
    {
        long proportional = _capacity == 0 ? 0 : (long)_upperUsed * capacity / _capacity;
        int stride = UpperLimit + 1;
        long room = Math.Max(_upper.Length, proportional + (64L * stride));
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

        levels = _levels.AsMemory(0, slots);
        bottom = _bottom.AsMemory(0, checked(slots * (BottomLimit + 1)));
        upper = _upper.AsMemory(0, (int)at);
        return true;
    }

    /// <summary>Shrinks to exactly <paramref name="capacity"/> nodes and forgets every link; caller excludes all other users.</summary>
    public void Reset(int capacity)
    {
        _bottom = new int[checked(capacity * (BottomLimit + 1))];
        _upperStart = new int[capacity];
        _levels = new byte[capacity];
        _inBottom = new int[capacity];
        _upper = [];
        _inUpper = [];
        _upperUsed = 0;
        _capacity = capacity;
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
            if (_upperUsed + length > _upper.Length)
            {
                Array.Resize(ref _upper, Math.Max(checked(_upperUsed + length), _upper.Length + (_upper.Length / 2) + 64));
                Array.Resize(ref _inUpper, _upper.Length / (UpperLimit + 1));
            }

            _upperStart[slot] = _upperUsed;
            _upper.AsSpan(_upperUsed, length).Clear();
            _inUpper.AsSpan(_upperUsed / (UpperLimit + 1), level).Clear();
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
                : MemoryMarshal.CreateSpan(ref Unsafe.Add(ref MemoryMarshal.GetArrayDataReference(_bottom), (nint)slot * stride), stride);
        }

        if (_mappedUpper != null)
        {
            return MappedUpperBlock(slot, level);
        }

        int upperStride = UpperLimit + 1;
        return _upper.AsSpan(_upperStart[slot] + ((level - 1) * upperStride), upperStride);
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
            ? ref _inBottom[slot]
            : ref _inUpper[(_upperStart[slot] / (UpperLimit + 1)) + level - 1];
    }

    /// <summary>The neighbour count of a list, read once, never more than the limit even mid-rewrite.</summary>
    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static int CountOf(Span<int> block) => Math.Min(Volatile.Read(ref block[0]), block.Length - 1);
}
