using System.Runtime.CompilerServices;
using System.Runtime.InteropServices;

namespace VectorKit.Internal;

/// <summary>
/// Rows of <typeparamref name="T"/> (float32 vectors, or byte codes) in one contiguous, 64-byte-aligned native block,
/// row <c>s</c> at <c>s × width</c>: scans stream it front to back, and 10⁷ rows of 768 floats (over 2³¹ elements)
/// still fit, which a managed array would not.
/// </summary>
/// <remarks>
/// Not thread-safe on its own: the owning index serialises growth against readers. Growth moves the block, so no
/// reference into it may be held across a call that can grow it. Freed by <see cref="Dispose"/>, or by the finalizer
/// if the owner was never disposed. The block is not reported to the collector as memory pressure: that report
/// starts full collections when large blocks are allocated (a compaction's copy, a growth), whose pauses stop every
/// search; an owner that is not disposed keeps its block until a collection finalizes it.
/// </remarks>
internal abstract unsafe class RowBuffer<T> : IDisposable
    where T : unmanaged
{
    private const nuint Alignment = 64;
    private T* _rows;

    // Rows that live in memory this buffer does not own (a mapped file's view): never freed, resized or written here.
    private bool _borrowed;

    protected RowBuffer(int dimension, int initialCapacity)
    {
        Dimension = dimension;
        if (initialCapacity > 0)
        {
            Resize(initialCapacity);
        }
    }

    ~RowBuffer() => Free();

    /// <summary>Elements per row (for codes, bytes per code).</summary>
    public int Dimension { get; }

    /// <summary>Rows the block can hold without moving.</summary>
    public int Capacity { get; private set; }

    /// <summary>Native bytes the buffer owns (0 for borrowed rows, which the page cache holds).</summary>
    public long Bytes => _borrowed ? 0 : (long)Capacity * Dimension * sizeof(T);

    /// <summary>Whether the rows are borrowed from memory the buffer does not own (see <see cref="Borrow"/>).</summary>
    public bool IsBorrowed => _borrowed;

    /// <summary>The first element of row <paramref name="slot"/>; valid until the buffer next grows.</summary>
    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public ref T Row(int slot) => ref Unsafe.AsRef<T>(_rows + ((nint)slot * Dimension));

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public Span<T> RowSpan(int slot) => new(_rows + ((nint)slot * Dimension), Dimension);

    /// <summary>
    /// Zeroes rows [<paramref name="first"/>, <paramref name="first"/> + <paramref name="count"/>), which touches their
    /// pages: a later write to them then costs no page fault (a block fresh from the system is mapped on first touch).
    /// </summary>
    public void ClearRows(int first, int count)
    {
        if (_borrowed || (uint)first > (uint)Capacity || (uint)count > (uint)(Capacity - first))
        {
            throw new ArgumentOutOfRangeException(nameof(count), $"rows [{first}, {first} + {count}) are not all writable rows of a buffer of capacity {Capacity}");
        }

        NativeMemory.Clear(_rows + ((nint)first * Dimension), (nuint)((long)count * Dimension * sizeof(T)));
    }

    /// <summary>Rows [0, count) as one span, when that fits a span (under 2³¹ elements).</summary>
    public Span<T> Rows(int count) => new(_rows, checked(count * Dimension));

    /// <summary>Rows [0, count) as memory, without a copy; valid until the buffer next grows or is freed.</summary>
    public ReadOnlyMemory<T> RowsMemory(int count) => new NativeMemoryView<T>(_rows, checked(count * Dimension)).Memory;

    /// <summary>Grows to hold at least <paramref name="required"/> rows: by half again, or exactly when one batch needs more.</summary>
    public void EnsureCapacity(int required)
    {
        if (required > Capacity)
        {
            long grown = Capacity + ((long)Capacity / 2);
            Resize((int)Math.Min(Math.Max(required, grown), Array.MaxLength));
        }
    }

    /// <summary>
    /// Points an empty buffer at <paramref name="rows"/> rows that someone else owns and keeps alive (a read-only
    /// mapped view), without copying; from then on the buffer never frees, moves or grows them.
    /// </summary>
    public void Borrow(T* first, int rows)
    {
        if (_rows != null || _borrowed)
        {
            throw new InvalidOperationException("Only an empty buffer can borrow rows.");
        }

        _rows = first;
        Capacity = rows;
        _borrowed = true;
    }

    /// <summary>Shrinks (or grows) to exactly <paramref name="capacity"/> rows, keeping the first rows' content.</summary>
    public void Resize(int capacity)
    {
        if (_borrowed)
        {
            throw new InvalidOperationException("Borrowed rows (a mapped file's) cannot be resized.");
        }

        nuint bytes = checked((nuint)capacity * (nuint)Dimension * (nuint)sizeof(T));
        if (capacity == 0)
        {
            Free();
            return;
        }

        // AlignedRealloc keeps min(old, new) bytes, so growing never loses rows.
        _rows = (T*)NativeMemory.AlignedRealloc(_rows, bytes, Alignment);
        Capacity = capacity;
    }

    public void CopyRow(int from, int to) => RowSpan(from).CopyTo(RowSpan(to));

    /// <summary>Copies rows [0, <paramref name="count"/>) into <paramref name="destination"/> (same width, room for them).</summary>
    public void CopyRowsTo(RowBuffer<T> destination, int count)
    {
        // Row by row: the whole block may exceed a span's 2³¹ elements.
        for (int slot = 0; slot < count; slot++)
        {
            RowSpan(slot).CopyTo(destination.RowSpan(slot));
        }
    }

    /// <summary>
    /// Exchanges blocks with <paramref name="other"/> (same width): this buffer takes over the other's rows and the other
    /// keeps this one's old block, to be disposed by the caller. A compaction or growth copies rows into a new buffer
    /// beside readers and swaps blocks in a short exclusive step; freeing a large block takes a while, so it happens
    /// after that step, when no reader can still hold the old rows.
    /// </summary>
    public void Adopt(RowBuffer<T> other)
    {
        if (_borrowed || other._borrowed)
        {
            throw new InvalidOperationException("Borrowed rows (a mapped file's) cannot change hands.");
        }

        // The memory pressure each block added moves with it.
        T* rows = _rows;
        int capacity = Capacity;
        _rows = other._rows;
        Capacity = other.Capacity;
        other._rows = rows;
        other.Capacity = capacity;
    }

    public void Dispose()
    {
        Free();
        GC.SuppressFinalize(this);
    }

    private void Free()
    {
        if (_borrowed)
        {
            // The owner unmaps the memory; only forget it.
            _rows = null;
            Capacity = 0;
            return;
        }

        if (_rows != null)
        {
            PageRelease.BeforeFree(_rows, Bytes);
            NativeMemory.AlignedFree(_rows);
            _rows = null;
            Capacity = 0;
        }
    }
}
