namespace VectorKit.Indexes.Exact;

public sealed partial class ExactIndex
{
    /// <inheritdoc/>
    public long[] GetIds()
    {
        using LockScopes.ReadScope read = _lock.EnterRead();
        ThrowIfDisposed();
        long[] ids = _ids.AsSpan(0, _count).ToArray();
        Array.Sort(ids);
        return ids;
    }
}
