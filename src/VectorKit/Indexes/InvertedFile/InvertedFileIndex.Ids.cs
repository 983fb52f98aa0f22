namespace VectorKit.Indexes.InvertedFile;

public sealed partial class InvertedFileIndex
{
    /// <inheritdoc/>
    public long[] GetIds()
    {
        _lock.EnterReadLock();
        try
        {
            ThrowIfDisposed();
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
