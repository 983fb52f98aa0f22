namespace VectorKit.Indexes;

/// <summary>
/// The writes an index acknowledges while a copy of it is rebuilt beside them, in the order they took effect, so the
/// copy can catch up before it replaces the original. A kind records each write at the point where it becomes visible
/// (under its write lock), which makes the log's order the order readers saw.
/// </summary>
/// <remarks>Thread-safe: writers append while the rebuilding thread takes what has gathered.</remarks>
internal sealed class ChangeLog
{
    private readonly object _sync = new();
    private List<Change> _changes = [];
    private long _pendingIds;

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
    public void RecordWrite(ReadOnlySpan<long> ids, ReadOnlySpan<float> vectors) => Append(new Change(ids.ToArray(), vectors.ToArray()));

    /// <summary>Records the removal of <paramref name="ids"/>, all present at that point.</summary>
    public void RecordRemove(ReadOnlySpan<long> ids) => Append(new Change(ids.ToArray(), null));

    /// <summary>Takes every change recorded so far, oldest first, leaving the log empty.</summary>
    public List<Change> Take()
    {
        lock (_sync)
        {
            List<Change> taken = _changes;
            _changes = [];
            _pendingIds = 0;
            return taken;
        }
    }

    /// <summary>
    /// Applies <paramref name="changes"/> to <paramref name="target"/> in order through its public writes; a write
    /// becomes an add-or-replace, which gives the same result whether the original was an add or a replace.
    /// </summary>
    public static void Replay(List<Change> changes, VectorIndex target)
    {
        foreach (Change change in changes)
        {
            if (change.Vectors is null)
            {
                target.RemoveRange(change.Ids);
            }
            else
            {
                target.AddOrReplaceRange(change.Ids, change.Vectors);
            }
        }
    }

    private void Append(Change change)
    {
        lock (_sync)
        {
            _changes.Add(change);
            _pendingIds += change.Ids.Length;
        }
    }

    /// <summary>One acknowledged write: <see cref="Vectors"/> is <see langword="null"/> for a removal.</summary>
    internal readonly record struct Change(long[] Ids, float[]? Vectors);
}
