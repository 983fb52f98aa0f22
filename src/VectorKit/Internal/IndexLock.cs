namespace VectorKit.Internal;

/// <summary>
/// An index's reader/writer lock, with the queries of batch searches as readers that give way to writers: a writer
/// first waits, outside the lock, for the batch queries holding it to end, keeping new ones from starting meanwhile,
/// and only then queues for the lock itself.
/// </summary>
/// <remarks>
/// A writer queued on a reader/writer lock holds back every reader that arrives after it, so a writer queued behind a
/// long batch query (a tile of the exact index's, or one pre-empted by the scheduler) would hold single searches back
/// for as long. Queued only behind single searches, it holds them back for about one search. Batch queries wait
/// instead, and a writer still waits for one batch query per worker at most, never for a whole batch.
/// Non-recursive, like the lock it wraps.
/// </remarks>
internal sealed class IndexLock
{
    private readonly ReaderWriterLockSlim _lock = new(LockRecursionPolicy.NoRecursion);

    // Batch queries holding the read lock or about to take it.
    private int _batchReaders;

    // Writers from the moment they wait for batch queries until they leave the write lock.
    private int _writers;

    // Writers still waiting for batch queries (not yet queued on the lock), for WaitingWriteCount.
    private int _draining;

    /// <summary>Whether the calling thread holds the write lock.</summary>
    public bool IsWriteLockHeld => _lock.IsWriteLockHeld;

    /// <summary>Writers waiting: for batch queries to end, or queued on the lock.</summary>
    public int WaitingWriteCount => _lock.WaitingWriteCount + Volatile.Read(ref _draining);

    public void EnterReadLock() => _lock.EnterReadLock();

    public void ExitReadLock() => _lock.ExitReadLock();

    /// <summary>The read lock for one batch query (or tile): waits first while a writer is waiting or writing.</summary>
    public void EnterBatchReadLock()
    {
        // Announce, then look for writers; a writer announces, then looks for batch readers (both with full fences),
        // so at least one of the two sees the other: either this query waits, or the writer waits for this query.
        while (true)
        {
            Interlocked.Increment(ref _batchReaders);
            if (Volatile.Read(ref _writers) == 0)
            {
                break;
            }

            Interlocked.Decrement(ref _batchReaders);
            var spin = default(SpinWait);
            while (Volatile.Read(ref _writers) != 0)
            {
                spin.SpinOnce();
            }
        }

        try
        {
            _lock.EnterReadLock();
        }
        catch
        {
            Interlocked.Decrement(ref _batchReaders);
            throw;
        }
    }

    public void ExitBatchReadLock()
    {
        _lock.ExitReadLock();
        Interlocked.Decrement(ref _batchReaders);
    }

    public void EnterWriteLock()
    {
        Interlocked.Increment(ref _writers);
        try
        {
            if (Volatile.Read(ref _batchReaders) != 0)
            {
                Interlocked.Increment(ref _draining);
                var spin = default(SpinWait);
                while (Volatile.Read(ref _batchReaders) != 0)
                {
                    spin.SpinOnce();
                }

                Interlocked.Decrement(ref _draining);
            }

            _lock.EnterWriteLock();
        }
        catch
        {
            Interlocked.Decrement(ref _writers);
            throw;
        }
    }

    public void ExitWriteLock()
    {
        _lock.ExitWriteLock();
        Interlocked.Decrement(ref _writers);
    }

    public ReadScope EnterRead()
    {
        EnterReadLock();
        return new ReadScope(this);
    }

    public WriteScope EnterWrite()
    {
        EnterWriteLock();
        return new WriteScope(this);
    }

    /// <summary>Leaves the read lock when disposed.</summary>
    public readonly struct ReadScope(IndexLock owner) : IDisposable
    {
        public void Dispose() => owner.ExitReadLock();
    }

    /// <summary>Leaves a batch query's read lock when disposed.</summary>
    public readonly struct BatchReadScope(IndexLock owner) : IDisposable
    {
        public void Dispose() => owner.ExitBatchReadLock();
    }

    /// <summary>Leaves the write lock when disposed.</summary>
    public readonly struct WriteScope(IndexLock owner) : IDisposable
    {
        public void Dispose() => owner.ExitWriteLock();
    }
}
