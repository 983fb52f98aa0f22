using System.Runtime.InteropServices;

namespace VectorKit.Internal;

/// <summary>
/// An index's reader/writer lock, built for searches that must not sleep: readers never block in the kernel but spin
/// (yielding, never sleeping) while a writer holds the lock, and writers hold it only for short steps. Batch queries
/// are readers that give way to writers: a writer first waits for the batch queries holding the lock to end, keeping
/// new ones from starting meanwhile.
/// </summary>
/// <remarks>
/// A reader blocked in the kernel is woken only when the scheduler next runs it, which on a busy machine costs
/// milliseconds however short the write was; spinning costs the length of the write. So every step taken under the
/// write lock must be short (copies and swaps, never searches or scans), which the index kinds keep to. Writers queue
/// on a monitor, one at a time, and may sleep. A writer arriving gives readers already spinning their turn first, so
/// back-to-back write steps cannot starve searches. Non-recursive: a thread holding either side must not enter again.
/// </remarks>
internal sealed class IndexLock
{
    // Writers take this first, one at a time; it is held from EnterWriteLock to ExitWriteLock.
    private readonly object _writerTurn = new();

    private Counters _counters;

    // The managed thread id of the writer holding the lock, 0 when none.
    private int _owner;

    /// <summary>Whether the calling thread holds the write lock.</summary>
    public bool IsWriteLockHeld => Volatile.Read(ref _owner) == Environment.CurrentManagedThreadId;

    /// <summary>Writers waiting: for their turn, for batch queries or for readers to leave.</summary>
    public int WaitingWriteCount => Volatile.Read(ref _counters.WaitingWriters);

    public void EnterReadLock()
    {
        // Announce, then look for a writer; a writer raises its flag, then looks for readers (both with full fences), so
        // at least one of the two sees the other: either this reader steps back, or the writer waits for it.
        while (true)
        {
            Interlocked.Increment(ref _counters.Readers);
            if (Volatile.Read(ref _counters.Writing) == 0)
            {
                return;
            }

            Interlocked.Decrement(ref _counters.Readers);
            Interlocked.Increment(ref _counters.SpinningReaders);
            var spin = default(SpinWait);
            while (Volatile.Read(ref _counters.Writing) != 0)
            {
                spin.SpinOnce(sleep1Threshold: -1);
            }

            Interlocked.Decrement(ref _counters.SpinningReaders);
        }
    }

    public void ExitReadLock() => Interlocked.Decrement(ref _counters.Readers);

    /// <summary>The read lock for one batch query (or tile): waits first while a writer is waiting or writing.</summary>
    public void EnterBatchReadLock()
    {
        // The same handshake as EnterReadLock's, against writers from the moment they arrive.
        while (true)
        {
            Interlocked.Increment(ref _counters.BatchReaders);
            if (Volatile.Read(ref _counters.Writers) == 0)
            {
                break;
            }

            Interlocked.Decrement(ref _counters.BatchReaders);
            var spin = default(SpinWait);
            while (Volatile.Read(ref _counters.Writers) != 0)
            {
                spin.SpinOnce();
            }
        }

        EnterReadLock();
    }

    public void ExitBatchReadLock()
    {
        ExitReadLock();
        Interlocked.Decrement(ref _counters.BatchReaders);
    }


    public void EnterWriteLock()
    {
        if (IsWriteLockHeld)
        {
            throw new LockRecursionException("The index's write lock is not recursive.");
        }

        Interlocked.Increment(ref _counters.Writers);
        Interlocked.Increment(ref _counters.WaitingWriters);
        bool turn = false;
        try
        {
            Monitor.Enter(_writerTurn, ref turn);
            var spin = default(SpinWait);

            // Batch queries end first, then readers already spinning (behind the previous write step) get their turn.
            while (Volatile.Read(ref _counters.BatchReaders) != 0)
            {
                spin.SpinOnce();
            }

            spin.Reset();
            while (Volatile.Read(ref _counters.SpinningReaders) != 0 && !spin.NextSpinWillYield)
            {
                spin.SpinOnce(sleep1Threshold: -1);
            }

            Interlocked.Exchange(ref _counters.Writing, 1);
            spin.Reset();
            while (Volatile.Read(ref _counters.Readers) != 0)
            {
                spin.SpinOnce(sleep1Threshold: -1);
            }

            Volatile.Write(ref _owner, Environment.CurrentManagedThreadId);
            Interlocked.Decrement(ref _counters.WaitingWriters);
        }
        catch
        {
            Volatile.Write(ref _counters.Writing, 0);
            if (turn)
            {
                Monitor.Exit(_writerTurn);
            }

            Interlocked.Decrement(ref _counters.WaitingWriters);
            Interlocked.Decrement(ref _counters.Writers);
            throw;
        }
    }

    public void ExitWriteLock()
    {
        if (!IsWriteLockHeld)
        {
            throw new SynchronizationLockException("The calling thread does not hold the index's write lock.");
        }

        Volatile.Write(ref _owner, 0);
        Volatile.Write(ref _counters.Writing, 0);
        Monitor.Exit(_writerTurn);
        Interlocked.Decrement(ref _counters.Writers);
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

    /// <summary>The counters readers and writers touch, each on a cache line of its own (readers bump theirs per search).</summary>
    [StructLayout(LayoutKind.Explicit, Size = 6 * 64)]
    private struct Counters
    {
        // Readers inside the lock, or announcing themselves.
        [FieldOffset(64)]
        public int Readers;

        // 1 while a writer holds the lock or waits for readers to leave.
        [FieldOffset(128)]
        public int Writing;

        // Readers that stepped back for a writer and spin until it leaves.
        [FieldOffset(192)]
        public int SpinningReaders;

        // Batch queries holding the read lock or about to take it.
        [FieldOffset(256)]
        public int BatchReaders;

        // Writers from the moment they arrive until they leave the write lock; WaitingWriters those not yet holding it.
        [FieldOffset(320)]
        public int Writers;

        [FieldOffset(324)]
        public int WaitingWriters;
    }
}
