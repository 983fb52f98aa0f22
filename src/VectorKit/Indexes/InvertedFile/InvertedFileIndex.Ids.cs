namespace VectorKit.Indexes.InvertedFile;

public sealed partial class InvertedFileIndex
{
    /// <inheritdoc/>
    public long[] GetIds()
    {
        using LockScopes.ReadScope read = _lock.EnterRead();
        ThrowIfDisposed();
        return _slotOf.SortedIds();
    }
}
