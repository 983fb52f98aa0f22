using System.Runtime.InteropServices;

namespace VectorKit.Indexes;

/// <summary>
/// The writes an index acknowledges while a copy of it is rebuilt beside them, in the order they took effect, so the
/// copy can catch up before it replaces the original. A kind records each write at the point where it becomes visible
/// (under its write lock), which makes the log's order the order readers saw.
/// </summary>
/// <remarks>
/// Thread-safe: writers append while the rebuilding thread takes what has gathered. The records live in native blocks,
/// not in one small object per write: a rebuild can last minutes, and every collection in between would copy the
/// surviving objects while all threads, searches included, stand still. Appending allocates no managed memory, so a
/// write's exclusive step never starts a collection here either.
/// </remarks>
internal sealed class ChangeLog : IDisposable
{
    private readonly object _sync = new();
    private Records _records = new();
    private long _pendingIds;
    private bool _disposed;

    // Writers append under their write lock, and the first call of a method compiles it: a throwaway log appends once
    // of each kind when the first real one is created (outside every lock), so no write's exclusive step compiles them.
    static ChangeLog()
    {
        using var warm = new ChangeLog();
        warm.RecordWrite([0], [0f]);
        warm.RecordRemove([0]);
    }

    /// <summary>Ids written or removed since the last <see cref="Take"/>.</summary>
    public long PendingIds
    {
        get
        {
            lock (_sync)
            {
                return _pendingIds;
            }
        }
    }

    /// <summary>Records an add or replace of <paramref name="ids"/> with <paramref name="vectors"/>, as the caller passed them.</summary>
    public void RecordWrite(ReadOnlySpan<long> ids, ReadOnlySpan<float> vectors) => Append(ids, vectors, removal: false);

    /// <summary>Records the removal of <paramref name="ids"/>, all present at that point.</summary>
    public void RecordRemove(ReadOnlySpan<long> ids) => Append(ids, default, removal: true);

    /// <summary>Takes every change recorded so far, oldest first, leaving the log empty; the caller disposes them.</summary>
    public Records Take()
    {
        lock (_sync)
        {
            Records taken = _records;
            _records = new Records();
            _pendingIds = 0;
            return taken;
        }
    }

    /// <summary>
    /// Applies <paramref name="changes"/> to <paramref name="target"/> in order through its public writes, then frees
    /// them; a write becomes an add-or-replace, which gives the same result whether the original was an add or a replace.
    /// </summary>
    public static void Replay(Records changes, VectorIndex target)
    {
        using (changes)
        {
            changes.ForEach(target, static (target, ids, vectors, removal) =>
            {
                if (removal)
                {
                    target.RemoveRange(ids);
                }
                else
                {
                    target.AddOrReplaceRange(ids, vectors);
                }
            });
        }
    }

    /// <summary>Frees what was recorded and not taken.</summary>
    public void Dispose()
    {
        lock (_sync)
        {
            _records.Dispose();
            _pendingIds = 0;
            _disposed = true;
        }
    }

    // A write that read the log just before a failed rebuild dropped it may still append: it is ignored.
    private void Append(ReadOnlySpan<long> ids, ReadOnlySpan<float> vectors, bool removal)
    {
        lock (_sync)
        {
            if (_disposed)
            {
                return;
            }

            _records.Append(ids, vectors, removal);
            _pendingIds += ids.Length;
        }
    }

    /// <summary>
    /// Changes in native blocks, each record a header (id count; float count, or -1 for a removal), the ids, then the
    /// floats, padded to 8 bytes. A record never spans two blocks; one larger than a block gets a block of its own.
    /// </summary>
    /// <remarks>Not thread-safe: the log serialises appends and hands the records over whole.</remarks>
    internal sealed unsafe class Records : IDisposable
    {
        private const int BlockBytes = 1 << 20;
        private const int HeaderBytes = 8;
        private readonly List<(nint Start, long Used)> _blocks = [];
        private long _room;

        ~Records() => Free();

        public void Append(ReadOnlySpan<long> ids, ReadOnlySpan<float> vectors, bool removal)
        {
            long bytes = HeaderBytes + ((long)ids.Length * sizeof(long)) + (((long)vectors.Length * sizeof(float) + 7) & ~7L);
            if (bytes > _room)
            {
                long size = Math.Max(BlockBytes, bytes);
                _blocks.Add(((nint)NativeMemory.Alloc((nuint)size), 0));
                _room = size;
            }

            (nint start, long used) = _blocks[^1];
            byte* at = (byte*)start + used;
            ((int*)at)[0] = ids.Length;
            ((int*)at)[1] = removal ? -1 : vectors.Length;
            ids.CopyTo(new Span<long>(at + HeaderBytes, ids.Length));
            vectors.CopyTo(new Span<float>(at + HeaderBytes + ((long)ids.Length * sizeof(long)), vectors.Length));
            _blocks[^1] = (start, used + bytes);
            _room -= bytes;
        }

        /// <summary>Calls <paramref name="apply"/> for each record, oldest first (the spans are valid during the call only).</summary>
        public void ForEach<TState>(TState state, ChangeAction<TState> apply)
        {
            foreach ((nint start, long used) in _blocks)
            {
                for (long at = 0; at < used;)
                {
                    byte* record = (byte*)start + at;
                    int idCount = ((int*)record)[0];
                    int floatCount = ((int*)record)[1];
                    bool removal = floatCount < 0;
                    floatCount = Math.Max(floatCount, 0);
                    var ids = new ReadOnlySpan<long>(record + HeaderBytes, idCount);
                    var vectors = new ReadOnlySpan<float>(record + HeaderBytes + ((long)idCount * sizeof(long)), floatCount);
                    apply(state, ids, vectors, removal);
                    at += HeaderBytes + ((long)idCount * sizeof(long)) + (((long)floatCount * sizeof(float) + 7) & ~7L);
                }
            }
        }

        public void Dispose()
        {
            Free();
            GC.SuppressFinalize(this);
        }

        private void Free()
        {
            foreach ((nint start, _) in _blocks)
            {
                NativeMemory.Free((void*)start);
            }

            _blocks.Clear();
            _room = 0;
        }
    }

    /// <summary>What <see cref="Records.ForEach"/> calls for each record.</summary>
    internal delegate void ChangeAction<TState>(TState state, ReadOnlySpan<long> ids, ReadOnlySpan<float> vectors, bool removal);
}
