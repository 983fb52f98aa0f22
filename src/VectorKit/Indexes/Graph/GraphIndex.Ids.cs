namespace VectorKit.Indexes.Graph;

public sealed partial class GraphIndex
{
    /// <inheritdoc/>
    /// <remarks>Items being linked by a concurrent add are listed once their vectors are stored; removed items never are.</remarks>
    public long[] GetIds()
    {
        // The id lookup holds exactly the live items (removed slots leave it at once).
        using LockScopes.ReadScope read = _lock.EnterRead();
        ThrowIfDisposed();
        return _slotOf.SortedIds();
    }
}
