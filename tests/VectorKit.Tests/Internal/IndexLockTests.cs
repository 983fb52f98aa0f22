using VectorKit.Internal;

namespace VectorKit.Tests.Internal;

/// <summary>
/// The index lock's guarantees, checked with threads: one writer at a time and no reader beside it, readers beside
/// each other, batch queries giving way to a waiting writer, and a reader that went to sleep behind a long write step
/// woken when it ends. The guard only ends a test that would otherwise hang.
/// </summary>
public sealed class IndexLockTests
{
    private static readonly TimeSpan Guard = TimeSpan.FromSeconds(60);

    [Fact]
    public void Writers_exclude_each_other_and_every_reader()
    {
        var rwLock = new IndexLock();
        int readersInside = 0, writersInside = 0, violations = 0;
        long left = 0, right = 0;
        var threads = new List<Thread>();
        for (int t = 0; t < 4; t++)
        {
            int seed = t;
            threads.Add(new Thread(() =>
            {
                var random = new Random(seed);
                for (int op = 0; op < 4_000; op++)
                {
                    if (random.Next(4) == 0)
                    {
                        rwLock.EnterWriteLock();
                        if (Interlocked.Increment(ref writersInside) != 1 || Volatile.Read(ref readersInside) != 0)
                        {
                            Interlocked.Increment(ref violations);
                        }

                        // Two writes a reader must never see apart.
                        long value = Volatile.Read(ref left) + 1;
                        Volatile.Write(ref left, value);
                        Thread.SpinWait(random.Next(200));
                        Volatile.Write(ref right, value);
                        Interlocked.Decrement(ref writersInside);
                        rwLock.ExitWriteLock();
                    }
                    else
                    {
                        bool batch = random.Next(2) == 0;
                        if (batch)
                        {
                            rwLock.EnterBatchReadLock();
                        }
                        else
                        {
                            rwLock.EnterReadLock();
                        }

                        Interlocked.Increment(ref readersInside);
                        if (Volatile.Read(ref writersInside) != 0 || Volatile.Read(ref left) != Volatile.Read(ref right))
                        {
                            Interlocked.Increment(ref violations);
                        }

                        Thread.SpinWait(random.Next(200));
                        Interlocked.Decrement(ref readersInside);
                        if (batch)
                        {
                            rwLock.ExitBatchReadLock();
                        }
                        else
                        {
                            rwLock.ExitReadLock();
                        }
                    }
                }
            }));
        }

        threads.ForEach(t => t.Start());
        Assert.All(threads, t => Assert.True(t.Join(Guard), "a thread did not finish: the lock deadlocked"));
        Assert.Equal(0, violations);
        Assert.Equal(Volatile.Read(ref left), Volatile.Read(ref right));
        Assert.True(left > 0);
    }

    [Fact]
    public void Readers_hold_the_lock_together()
    {
        var rwLock = new IndexLock();
        rwLock.EnterReadLock();
        Thread second = Start(() =>
        {
            rwLock.EnterReadLock();
            rwLock.ExitReadLock();
        });
        Assert.True(second.Join(Guard), "a second reader waited for the first");
        rwLock.ExitReadLock();
    }

    [Fact]
    public void A_writer_waits_for_a_reader_and_readers_after_it_wait_for_the_writer()
    {
        var rwLock = new IndexLock();
        rwLock.EnterReadLock();
        bool written = false, leaving = false;
        Thread writer = Start(() =>
        {
            rwLock.EnterWriteLock();
            Volatile.Write(ref written, true);
            Thread.Sleep(20);
            Volatile.Write(ref leaving, true);
            rwLock.ExitWriteLock();
        });
        SpinUntil(() => rwLock.WaitingWriteCount == 1);
        Assert.False(Volatile.Read(ref written));

        rwLock.ExitReadLock();
        SpinUntil(() => Volatile.Read(ref written));

        // The writer holds the lock past the spin budget: this reader goes to sleep and is woken when it leaves.
        rwLock.EnterReadLock();
        Assert.True(Volatile.Read(ref leaving), "a reader entered while the writer held the lock");
        rwLock.ExitReadLock();
        Assert.True(writer.Join(Guard));
    }

    [Fact]
    public void A_writer_that_went_to_sleep_for_slow_readers_enters_only_after_the_last_has_left()
    {
        var rwLock = new IndexLock();
        bool firstLeft = false, secondLeft = false, sawBoth = false;
        var inside = new CountdownEvent(2);
        var release = new ManualResetEventSlim[] { new(), new() };
        Thread[] readers = [.. Enumerable.Range(0, 2).Select(r => Start(() =>
        {
            rwLock.EnterReadLock();
            inside.Signal();
            release[r].Wait(Guard);
            if (r == 0)
            {
                Volatile.Write(ref firstLeft, true);
            }
            else
            {
                Volatile.Write(ref secondLeft, true);
            }

            rwLock.ExitReadLock();
        }))];
        Assert.True(inside.Wait(Guard));
        Thread writer = Start(() =>
        {
            rwLock.EnterWriteLock();
            sawBoth = Volatile.Read(ref firstLeft) && Volatile.Read(ref secondLeft);
            rwLock.ExitWriteLock();
        });

        // Well past the writer's spin budget: it sleeps, and the first reader to leave must not let it in.
        SpinUntil(() => rwLock.WaitingWriteCount == 1);
        Thread.Sleep(20);
        release[0].Set();
        Assert.True(readers[0].Join(Guard));
        Thread.Sleep(20);
        Assert.True(writer.IsAlive, "the writer entered while a reader was inside");
        release[1].Set();
        Assert.True(writer.Join(Guard) && readers[1].Join(Guard));
        Assert.True(sawBoth, "the writer entered before both readers had left");
    }

    [Fact]
    public void A_writer_waiting_for_a_reader_lets_new_readers_in_until_its_patience_ends()
    {
        var rwLock = new IndexLock { WriterPatience = TimeSpan.FromMinutes(10) };
        rwLock.EnterReadLock();
        bool written = false;
        Thread writer = Start(() =>
        {
            rwLock.EnterWriteLock();
            Volatile.Write(ref written, true);
            rwLock.ExitWriteLock();
        });
        SpinUntil(() => rwLock.WaitingWriteCount == 1);

        // Well past the writer's spin budget: it sleeps with its flag down, so a search arriving now runs.
        Thread.Sleep(20);
        Assert.True(Start(() =>
        {
            rwLock.EnterReadLock();
            rwLock.ExitReadLock();
        }).Join(Guard), "a new reader waited for a writer that was itself waiting for a reader");
        Assert.False(Volatile.Read(ref written), "the writer entered while a reader was inside");

        rwLock.ExitReadLock();
        Assert.True(writer.Join(Guard));
        Assert.True(written);
    }

    [Fact]
    public void A_writer_enters_between_readers_that_never_all_leave_at_once()
    {
        // Two readers take turns so that one is always inside: a moment without a reader never comes, so past its
        // patience the writer keeps new readers out, the one inside leaves, and the writer enters.
        var rwLock = new IndexLock { WriterPatience = TimeSpan.FromMilliseconds(5) };
        int inside = 0, turn = 0, handovers = 0;
        bool stop = false;
        Thread[] readers = [.. Enumerable.Range(0, 2).Select(r => Start(() =>
        {
            if (r == 1)
            {
                SpinUntil(() => Volatile.Read(ref inside) == 1);
            }

            while (!Volatile.Read(ref stop))
            {
                rwLock.EnterReadLock();
                Interlocked.Increment(ref inside);

                // Leave only on this reader's turn with the other inside, or when a writer keeps the other out.
                SpinWait.SpinUntil(() => (Volatile.Read(ref inside) == 2 && Volatile.Read(ref turn) == r) || rwLock.KeepsReadersOut || Volatile.Read(ref stop));
                Volatile.Write(ref turn, 1 - r);
                Interlocked.Increment(ref handovers);
                Interlocked.Decrement(ref inside);
                rwLock.ExitReadLock();
            }
        }))];

        SpinUntil(() => Volatile.Read(ref handovers) > 100);
        Thread writer = Start(() =>
        {
            rwLock.EnterWriteLock();
            rwLock.ExitWriteLock();
        });
        Assert.True(writer.Join(Guard), "the writer never entered between overlapping readers");
        Volatile.Write(ref stop, true);
        Assert.True(readers.All(t => t.Join(Guard)));
    }

    [Fact]
    public void A_waiting_writer_keeps_new_batch_queries_out_until_it_has_written()
    {
        var rwLock = new IndexLock();
        rwLock.EnterBatchReadLock();
        bool written = false, batchSawWrite = false;
        Thread writer = Start(() =>
        {
            rwLock.EnterWriteLock();
            Volatile.Write(ref written, true);
            rwLock.ExitWriteLock();
        });
        SpinUntil(() => rwLock.WaitingWriteCount == 1);
        Thread batch = Start(() =>
        {
            rwLock.EnterBatchReadLock();
            batchSawWrite = Volatile.Read(ref written);
            rwLock.ExitBatchReadLock();
        });

        rwLock.ExitBatchReadLock();
        Assert.True(writer.Join(Guard) && batch.Join(Guard));
        Assert.True(batchSawWrite, "a batch query started while a writer was waiting");
    }

    [Fact]
    public void The_write_lock_is_not_recursive_and_only_its_holder_leaves_it()
    {
        var rwLock = new IndexLock();
        Assert.Throws<SynchronizationLockException>(rwLock.ExitWriteLock);
        rwLock.EnterWriteLock();
        Assert.True(rwLock.IsWriteLockHeld);
        Assert.Throws<LockRecursionException>(rwLock.EnterWriteLock);
        bool heldElsewhere = true;
        Assert.True(Start(() => heldElsewhere = rwLock.IsWriteLockHeld).Join(Guard));
        Assert.False(heldElsewhere);
        rwLock.ExitWriteLock();
        Assert.False(rwLock.IsWriteLockHeld);
    }

    private static Thread Start(Action body)
    {
        var thread = new Thread(() => body()) { IsBackground = true };
        thread.Start();
        return thread;
    }

    private static void SpinUntil(Func<bool> condition)
        => Assert.True(SpinWait.SpinUntil(condition, Guard), "the awaited state never came");
}
