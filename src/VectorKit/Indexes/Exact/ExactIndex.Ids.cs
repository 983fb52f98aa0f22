namespace VectorKit.Indexes.Exact;

public sealed partial class ExactIndex
{
    /// <inheritdoc/>
    public long[] GetIds()
    {
        _lock.EnterReadLock();
        try
        {
            ThrowIfDisposed();
            long[] ids = _ids.AsSpan(0, _count).ToArray();
            Array.Sort(ids);
            return ids;
        }
        finally
        {
            _lock.ExitReadLock();
        }
    }
}
