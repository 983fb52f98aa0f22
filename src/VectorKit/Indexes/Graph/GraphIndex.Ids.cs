namespace VectorKit.Indexes.Graph;

public sealed partial class GraphIndex
{
    /// <inheritdoc/>
    /// <remarks>Items being linked by a concurrent add are listed once their vectors are stored; removed items never are.</remarks>
    public long[] GetIds()
    {
        _lock.EnterReadLock();
        try
        {
            ThrowIfDisposed();

            // The id lookup holds exactly the live items (removed slots leave it at once).
            long[] ids = new long[_slotOf.Count];
            _slotOf.Keys.CopyTo(ids, 0);
            Array.Sort(ids);
            return ids;
        }
        finally
        {
            _lock.ExitReadLock();
        }
    }
}
