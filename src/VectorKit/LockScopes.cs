namespace VectorKit;

/// <summary>
/// <c>using</c>-scoped reader/writer lock sections, so a short locked member reads as its body rather than as a
/// try/finally around it. The scopes are structs: no allocation.
/// </summary>
internal static class LockScopes
{
    public static ReadScope EnterRead(this ReaderWriterLockSlim rwLock)
    {
        rwLock.EnterReadLock();
        return new ReadScope(rwLock);
    }

    public static WriteScope EnterWrite(this ReaderWriterLockSlim rwLock)
    {
        rwLock.EnterWriteLock();
        return new WriteScope(rwLock);
    }

    public static SemaphoreScope EnterScope(this SemaphoreSlim semaphore, CancellationToken cancellationToken)
    {
        semaphore.Wait(cancellationToken);
        return new SemaphoreScope(semaphore);
    }

    /// <summary>Leaves the read lock when disposed.</summary>
    public readonly struct ReadScope(ReaderWriterLockSlim rwLock) : IDisposable
    {
        public void Dispose() => rwLock.ExitReadLock();
    }

    /// <summary>Leaves the write lock when disposed.</summary>
    public readonly struct WriteScope(ReaderWriterLockSlim rwLock) : IDisposable
    {
        public void Dispose() => rwLock.ExitWriteLock();
    }

    /// <summary>Releases the semaphore when disposed.</summary>
    public readonly struct SemaphoreScope(SemaphoreSlim semaphore) : IDisposable
    {
        public void Dispose() => semaphore.Release();
    }
}
