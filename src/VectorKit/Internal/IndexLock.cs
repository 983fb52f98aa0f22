using System.Runtime.CompilerServices;
using System.Runtime.InteropServices;

namespace VectorKit.Internal;

/// <summary>
/// An index's reader/writer lock, built for searches that must not sleep: readers spin (yielding, never sleeping)
/// while a writer holds the lock for one of its short steps, and sleep only when a step outlasts the spin budget. Batch queries
/// are readers that give way to writers: a writer first waits for the batch queries holding the lock to end, keeping
/// new ones from starting meanwhile.
/// </summary>
/// <remarks>
/// A reader blocked in the kernel is woken only when the scheduler next runs it, which on a busy machine costs
/// milliseconds however short the write was; spinning costs the length of the write. So every step taken under the
/// write lock must be short (copies and swaps, never searches or scans), which the index kinds keep to. A writer that
/// holds the lock past the budget was most likely pre-empted, and a spinning reader would keep it from a core.
/// A writer keeps new readers out only from a moment when none is inside (spinning for one, then sleeping with new
/// readers still let in until those inside leave, up to a few searches' length), so the searches held back are those
/// that arrive during its step, not during its wait for the searches in flight, nor while it waits to be woken; past
/// its patience it keeps them out, spins for those inside, and sleeps until the last of them wakes it. Writers
/// queue on a monitor, one at a time, and may sleep. A writer arriving gives readers already waiting their turn first
/// (up to about a search's length, time for a sleeping one to be woken), so back-to-back write steps cannot starve
/// searches. Non-recursive: a thread holding either side must not enter again.
/// </remarks>
internal sealed class IndexLock
{
    // How long a reader spins behind a writer before it sleeps: longer than any exclusive step the index kinds take
    // on an idle core, far shorter than a scheduler's time slice.
    private static readonly long SpinBudgetTicks = System.Diagnostics.Stopwatch.Frequency / 10_000;

    // How long a writer spins for a moment with no reader inside before it sleeps (flag down) until the readers inside
    // leave, and how long readers already waiting behind a step get to enter before the next: about a graph search.
    private static readonly long DrainSpinBudgetTicks = System.Diagnostics.Stopwatch.Frequency / 5_000;

    // How long a writer waits, its flag down, for a moment with no reader inside before it keeps new readers out
    // anyway: several searches of the slower kinds, so a lone searcher's pauses are met, and a bound on writers'
    // waits when readers overlap without a break.
    private static readonly long DefaultWriterPatienceTicks = System.Diagnostics.Stopwatch.Frequency / 250;

    // How long a writer past its patience, its flag up, spins for the readers inside before it sleeps: about the
    // longest search of a list-scanning kind, so a reader that is running leaves before the writer would sleep.
    private static readonly long ForcedDrainSpinTicks = System.Diagnostics.Stopwatch.Frequency / 500;

    // Writers take this first, one at a time; it is held from EnterWriteLock to ExitWriteLock.
    private readonly object _writerTurn = new();

    // Readers that spun past the budget sleep on this until the writer leaves.
    private readonly object _wake = new();

    // A writer whose readers outlast its spin sleeps on this until the last of them leaves.
    private readonly object _drained = new();

    // The time this thread's reads waited for writers since it last asked (Stopwatch ticks; diagnostics, slow path only).
    [ThreadStatic]
    private static long t_readWaitTicks;

    private Counters _counters;

    private long _writerPatienceTicks = DefaultWriterPatienceTicks;

    // The managed thread id of the writer holding the lock, 0 when none.
    private int _owner;

    // When the writer raised its flag (from then on new readers wait), and the longest such hold so far (Stopwatch
    // ticks; diagnostics).
    private long _heldSince;
    private long _heldSinceCpu;
    private long _ownedSince;
    private long _longestHold;

    /// <summary>Whether the calling thread holds the write lock.</summary>
    public bool IsWriteLockHeld => Volatile.Read(ref _owner) == Environment.CurrentManagedThreadId;

    /// <summary>
    /// The longest time a writer kept new readers out (from raising its flag, through the wait for readers inside, to
    /// leaving) since the last <see cref="ResetLongestWriteHold"/> (for benchmarks).
    /// </summary>
    public TimeSpan LongestWriteHold => TimeSpan.FromSeconds((double)Volatile.Read(ref _longestHold) / System.Diagnostics.Stopwatch.Frequency);

    public void ResetLongestWriteHold() => Volatile.Write(ref _longestHold, 0);

    /// <summary>
    /// How long a writer waits, new readers still let in, for a moment with no reader inside before it keeps them out
    /// (a few searches' length by default; tests lengthen it to watch a waiting writer).
    /// </summary>
    internal TimeSpan WriterPatience
    {
        get => TimeSpan.FromSeconds((double)_writerPatienceTicks / System.Diagnostics.Stopwatch.Frequency);
        set => _writerPatienceTicks = (long)(value.TotalSeconds * System.Diagnostics.Stopwatch.Frequency);
    }

    /// <summary>
    /// When positive, every hold of this lock's write side longer than this many Stopwatch ticks records the writer's
    /// stack and time (Stopwatch ticks) at its end, how long it waited for readers to leave, and the processor time it
    /// used (for benchmarks that look for long exclusive steps; off by default). Per lock, so a private copy (a
    /// compaction's rebuild) stays out.
    /// </summary>
    internal long TraceHoldsLongerThan
    {
        get => _traceHoldsLongerThan;
        set
        {
            _traceHoldsLongerThan = value;
            _recentHolds = value > 0 ? new (long, long)[RecentHoldCount] : null;
        }
    }

    private long _traceHoldsLongerThan;

    // While tracing, when every hold (of any length) raised its flag and left, the latest RecentHoldCount of them.
    private const int RecentHoldCount = 1 << 20;
    private (long RaisedTicks, long LeftTicks)[]? _recentHolds;
    private long _holdsRecorded;

    /// <summary>The holds recorded while tracing, in all (those before the latest 2^20 are no longer kept).</summary>
    internal long HoldsRecorded => Volatile.Read(ref _holdsRecorded);

    /// <summary>
    /// While tracing (<see cref="TraceHoldsLongerThan"/>), the holds of any length that overlapped the two Stopwatch
    /// times, among the latest 2^20, oldest first (for benchmarks: whether a reader's long wait was one step, many short
    /// ones back to back, or the reader not running).
    /// </summary>
    internal List<(long RaisedTicks, long LeftTicks)> HoldsBetween(long fromTicks, long toTicks)
    {
        var found = new List<(long, long)>();
        if (_recentHolds is { } holds)
        {
            long count = Volatile.Read(ref _holdsRecorded);
            for (long i = Math.Max(0, count - RecentHoldCount); i < count; i++)
            {
                (long raised, long left) = holds[i % RecentHoldCount];
                if (left > fromTicks && raised < toTicks)
                {
                    found.Add((raised, left));
                }
            }
        }

        return found;
    }

    private static readonly System.Collections.Concurrent.ConcurrentQueue<(double Ms, double DrainMs, double CpuMs, long EndTicks, string Stack, string Drain)> s_longHolds = new();

    // While tracing, what the current writer's wait for readers saw.
    private DrainTrace _drain;

    /// <summary>The holds recorded under <see cref="TraceHoldsLongerThan"/> since the last call, emptying the record.</summary>
    internal static List<(double Ms, double DrainMs, double CpuMs, long EndTicks, string Stack, string Drain)> TakeLongHolds()
    {
        var holds = new List<(double Ms, double DrainMs, double CpuMs, long EndTicks, string Stack, string Drain)>();
        while (s_longHolds.TryDequeue(out var hold))
        {
            holds.Add(hold);
        }

        return holds;
    }

    /// <summary>How long the calling thread's reads waited for writers since its last call, on any index (for benchmarks).</summary>
    public static TimeSpan TakeReadWait()
    {
        long ticks = t_readWaitTicks;
        t_readWaitTicks = 0;
        return TimeSpan.FromSeconds((double)ticks / System.Diagnostics.Stopwatch.Frequency);
    }

    /// <summary>
    /// How many write steps have ended: unchanged between two reads, no write step ended in between, so what a writer
    /// copied without the lock (holding off other writers' steps by other means or not) is still current if the
    /// count it read before copying equals the count once it holds the lock.
    /// </summary>
    internal long WritesCompleted => Volatile.Read(ref _writesCompleted);

    private long _writesCompleted;

    /// <summary>Whether a writer's flag keeps new readers out at this moment.</summary>
    internal bool KeepsReadersOut => Volatile.Read(ref _counters.Writing) != 0;

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

            LeaveReaders();
            Interlocked.Increment(ref _counters.SpinningReaders);
            long waitStart = System.Diagnostics.Stopwatch.GetTimestamp();
            WaitForWriter();
            t_readWaitTicks += System.Diagnostics.Stopwatch.GetTimestamp() - waitStart;
            Interlocked.Decrement(ref _counters.SpinningReaders);
        }
    }

    // Spins (yielding, never sleeping) while the writer's step is short; past the budget the writer was probably
    // pre-empted, and spinning on would keep it from a core, so the reader sleeps until the writer leaves.
    private void WaitForWriter()
    {
        long start = System.Diagnostics.Stopwatch.GetTimestamp();
        var spin = default(SpinWait);
        while (Volatile.Read(ref _counters.Writing) != 0)
        {
            if (System.Diagnostics.Stopwatch.GetTimestamp() - start < SpinBudgetTicks)
            {
                spin.SpinOnce(sleep1Threshold: -1);
                continue;
            }

            // Announce, then look (full fences on both sides, as in EnterReadLock): the leaving writer either sees a
            // sleeper and wakes it under the monitor, or this reader sees the flag down. The timeout is a backstop.
            Interlocked.Increment(ref _counters.SleepingReaders);
            lock (_wake)
            {
                if (Volatile.Read(ref _counters.Writing) != 0)
                {
                    Monitor.Wait(_wake, 1);
                }
            }

            Interlocked.Decrement(ref _counters.SleepingReaders);
        }
    }

    public void ExitReadLock() => LeaveReaders();

    // The last reader out wakes a writer sleeping for readers to leave. Decrement, then look (full fences on both
    // sides, as in EnterReadLock): either this reader sees the sleeper and pulses under the monitor, or the writer,
    // looking after announcing itself, sees no reader.
    private void LeaveReaders()
    {
        if (Interlocked.Decrement(ref _counters.Readers) == 0)
        {
            if (Volatile.Read(ref _counters.DrainingWriter) != 0)
            {
                lock (_drained)
                {
                    Monitor.Pulse(_drained);
                }
            }

            if (_traceHoldsLongerThan > 0 && Volatile.Read(ref _counters.Writing) != 0)
            {
                _drain.LastLeftTicks = System.Diagnostics.Stopwatch.GetTimestamp();
                _drain.LastLeftThread = Environment.CurrentManagedThreadId;
            }
        }
    }

    /// <summary>
    /// The read lock for a long reader (one block of a batch query, the linking of an add): waits first while a writer
    /// is waiting or writing, and a writer waits for it to end before keeping new readers out.
    /// </summary>
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

            // Batch queries end first, then readers already waiting (behind the previous write step) get their turn,
            // so back-to-back steps cannot keep a search out: one that went to sleep needs a moment to be woken and
            // run, so the writer gives them up to about a search's length.
            while (Volatile.Read(ref _counters.BatchReaders) != 0)
            {
                spin.SpinOnce();
            }

            spin.Reset();
            long turnStart = System.Diagnostics.Stopwatch.GetTimestamp();
            while (Volatile.Read(ref _counters.SpinningReaders) != 0 && System.Diagnostics.Stopwatch.GetTimestamp() - turnStart < DrainSpinBudgetTicks)
            {
                spin.SpinOnce(sleep1Threshold: -1);
            }

            RaiseWritingFlag();
            WaitForReaders();

            Volatile.Write(ref _owner, Environment.CurrentManagedThreadId);
            _ownedSince = System.Diagnostics.Stopwatch.GetTimestamp();
            Interlocked.Decrement(ref _counters.WaitingWriters);
        }
        catch
        {
            LowerWritingFlag();
            if (turn)
            {
                Monitor.Exit(_writerTurn);
            }

            Interlocked.Decrement(ref _counters.WaitingWriters);
            Interlocked.Decrement(ref _counters.Writers);
            throw;
        }
    }

    // Raises the flag that keeps new readers out, at a moment when no reader is inside: searches go on meanwhile, so
    // the writer keeps out only those that arrive during its own short step, and never sleeps with its flag up while a
    // search is inside (were it woken late, every search would wait for it). It spins for such a moment while a search
    // is likely to end, then sleeps, flag down, until the readers inside leave, and looks again. A reader that slips in
    // between the look and the raise has a whole search to run, so the writer steps back. Past its patience (readers
    // that never all leave at once) it keeps the flag up and waits for those inside (WaitForReaders), so writers are
    // not starved.
    // Compiled fully at first use (as is WaitForReaders): a loop that has run long in a method's first compiled form
    // is recompiled on the spot, which with the flag up would keep every search waiting for the compiler.
    [MethodImpl(MethodImplOptions.AggressiveOptimization)]
    private void RaiseWritingFlag()
    {
        long arrived = System.Diagnostics.Stopwatch.GetTimestamp();
        long spinningSince = arrived;
        var spin = default(SpinWait);
        int sleeps = 0;
        while (true)
        {
            if (Volatile.Read(ref _counters.Readers) == 0)
            {
                Interlocked.Exchange(ref _counters.Writing, 1);
                _heldSince = System.Diagnostics.Stopwatch.GetTimestamp();
                if (Volatile.Read(ref _counters.Readers) == 0)
                {
                    break;
                }

                LowerWritingFlag();
            }

            long now = System.Diagnostics.Stopwatch.GetTimestamp();
            if (now - arrived >= _writerPatienceTicks)
            {
                Interlocked.Exchange(ref _counters.Writing, 1);
                _heldSince = System.Diagnostics.Stopwatch.GetTimestamp();
                break;
            }

            if (now - spinningSince < DrainSpinBudgetTicks)
            {
                spin.SpinOnce(sleep1Threshold: -1);
                continue;
            }

            sleeps++;
            SleepUntilReadersLeave();
            spinningSince = System.Diagnostics.Stopwatch.GetTimestamp();
            spin.Reset();
        }

        _heldSinceCpu = 0;
        if (_traceHoldsLongerThan > 0)
        {
            _heldSinceCpu = ThreadClock.CpuNanoseconds();
            _drain = new DrainTrace { ArrivedTicks = arrived, SleepsBeforeRaise = sleeps, ReadersAtRaise = Volatile.Read(ref _counters.Readers) };
        }
    }

    // With its flag up past its patience: spins for the readers inside to leave while they are likely running, then
    // sleeps until the last of them wakes it, giving the core up to a reader the writer may have kept from it.
    [MethodImpl(MethodImplOptions.AggressiveOptimization)]
    private void WaitForReaders()
    {
        var spin = default(SpinWait);
        long looked = _heldSince;
        while (Volatile.Read(ref _counters.Readers) != 0)
        {
            long now = System.Diagnostics.Stopwatch.GetTimestamp();
            if (_traceHoldsLongerThan > 0)
            {
                _drain.LongestGapTicks = Math.Max(_drain.LongestGapTicks, now - looked);
                looked = now;
            }

            if (now - _heldSince < ForcedDrainSpinTicks)
            {
                spin.SpinOnce(sleep1Threshold: -1);
                continue;
            }

            _drain.Sleeps++;
            SleepUntilReadersLeave();
        }
    }

    // Sleeps until the last reader inside leaves and wakes this writer (the timeout is a backstop).
    private void SleepUntilReadersLeave()
    {
        Interlocked.Exchange(ref _counters.DrainingWriter, 1);
        try
        {
            lock (_drained)
            {
                if (Volatile.Read(ref _counters.Readers) != 0)
                {
                    Monitor.Wait(_drained, 1);
                }
            }
        }
        finally
        {
            Interlocked.Exchange(ref _counters.DrainingWriter, 0);
        }
    }

    public void ExitWriteLock()
    {
        if (!IsWriteLockHeld)
        {
            throw new SynchronizationLockException("The calling thread does not hold the index's write lock.");
        }

        long held = System.Diagnostics.Stopwatch.GetTimestamp() - _heldSince;
        if (held > _longestHold)
        {
            Volatile.Write(ref _longestHold, held);
        }

        if (_recentHolds is { } recent)
        {
            recent[_holdsRecorded % RecentHoldCount] = (_heldSince, _heldSince + held);
            Volatile.Write(ref _holdsRecorded, _holdsRecorded + 1);
        }

        if (TraceHoldsLongerThan > 0 && held > TraceHoldsLongerThan)
        {
            double drain = Milliseconds(_ownedSince - _heldSince);
            long cpu = ThreadClock.CpuNanoseconds();
            double cpuMs = cpu < 0 || _heldSinceCpu < 0 ? double.NaN : (cpu - _heldSinceCpu) / 1e6;
            string detail = _drain.Describe(_heldSince);
            s_longHolds.Enqueue((Milliseconds(held), drain, cpuMs, _heldSince + held, new System.Diagnostics.StackTrace(1, false).ToString(), detail));
        }

        Volatile.Write(ref _writesCompleted, _writesCompleted + 1);
        Volatile.Write(ref _owner, 0);
        LowerWritingFlag();
        Monitor.Exit(_writerTurn);
        Interlocked.Decrement(ref _counters.Writers);
    }

    // Lets readers in again, waking those that went to sleep.
    private void LowerWritingFlag()
    {
        Interlocked.Exchange(ref _counters.Writing, 0);
        if (Volatile.Read(ref _counters.SleepingReaders) != 0)
        {
            lock (_wake)
            {
                Monitor.PulseAll(_wake);
            }
        }
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

    private static double Milliseconds(long ticks) => (double)ticks * 1000 / System.Diagnostics.Stopwatch.Frequency;

    /// <summary>While tracing, what one writer's wait for readers saw (Stopwatch ticks; diagnostics).</summary>
    private struct DrainTrace
    {
        public long ArrivedTicks;
        public int SleepsBeforeRaise;
        public int ReadersAtRaise;

        // When the last reader inside left while the flag was up, and on which thread.
        public long LastLeftTicks;
        public int LastLeftThread;

        // The writer's longest gap between two looks at the readers, and its sleeps, with the flag up.
        public long LongestGapTicks;
        public int Sleeps;

        public readonly string Describe(long raisedTicks) => string.Create(
            System.Globalization.CultureInfo.InvariantCulture,
            $"waited {Milliseconds(raisedTicks - ArrivedTicks):F2} ms with the flag down ({SleepsBeforeRaise} sleep(s)); {ReadersAtRaise} reader(s) inside at the raise; the last left at {(LastLeftTicks == 0 ? "–" : Milliseconds(LastLeftTicks - raisedTicks).ToString("F2", System.Globalization.CultureInfo.InvariantCulture))} ms on thread {LastLeftThread} (the writer is {Environment.CurrentManagedThreadId}); the writer's longest gap between looks {Milliseconds(LongestGapTicks):F2} ms, {Sleeps} sleep(s)");
    }

    /// <summary>The counters readers and writers touch, each on a cache line of its own (readers bump theirs per search).</summary>
    [StructLayout(LayoutKind.Explicit, Size = 7 * 64)]
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

        // Readers that spun past the budget and sleep until the writer leaves.
        [FieldOffset(384)]
        public int SleepingReaders;

        // 1 while a writer sleeps until the readers inside have left (readers read it as they leave).
        [FieldOffset(388)]
        public int DrainingWriter;
    }
}
