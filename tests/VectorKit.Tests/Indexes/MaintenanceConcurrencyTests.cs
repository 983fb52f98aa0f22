using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Indexes.Graph;
using VectorKit.Indexes.InvertedFile;
using VectorKit.Persistence;
using VectorKit.Tests.Indexes.Contract;
using VectorKit.Tests.Indexes.Graph;
using VectorKit.Tests.TestData;

namespace VectorKit.Tests.Indexes;

/// <summary>
/// Who waits for whom: a write does not wait for a whole batch search, a search does not wait for a save (even with a
/// write queued behind the save), nor for a compaction's rebuild or the graph's global pass. Each case parks the long
/// operation at a callback (batch progress, the save's stream, compaction progress, the pass's step hook) and checks
/// that the other operation finishes meanwhile. The guard only ends a test that would otherwise hang: it fails when
/// the other operation is blocked, whatever the machine's speed.
/// </summary>
public sealed class MaintenanceConcurrencyTests
{
    private const int Guard = 60_000;

    public static TheoryData<string> Kinds => new() { "exact", "graph", "inverted-file" };

    [Theory]
    [MemberData(nameof(Kinds))]
    public void AWrite_Completes_WhileABatchSearchIsParkedBetweenBlocks(string kind)
    {
        const int n = 1500, d = 16, queryCount = 200, k = 5;
        float[] data = ContractData.Rows(n, d, seed: 5);
        using VectorIndex index = Create(kind, d, data);
        var before = new NaiveIndex(d, DistanceMetric.SquaredEuclidean);
        var after = new NaiveIndex(d, DistanceMetric.SquaredEuclidean);
        for (int i = 0; i < n; i++)
        {
            before.Add(i, data.AsSpan(i * d, d));
            if (i != queryCount - 1)
            {
                after.Add(i, data.AsSpan(i * d, d));
            }
        }

        // Query i is item i's own vector; the last query's item is removed while the batch is parked after its first block.
        float[] queries = data.AsSpan(0, queryCount * d).ToArray();
        using var parked = new ManualResetEventSlim();
        using var written = new ManualResetEventSlim();
        int firstBlock = 0;
        bool parkTimedOut = false;
        var progress = new SynchronousProgress<int>(done =>
        {
            if (Interlocked.CompareExchange(ref firstBlock, done, 0) == 0)
            {
                parked.Set();
                parkTimedOut = !written.Wait(Guard);
            }
        });

        var batch = new Background(() => index.SearchBatch(queries, k, new SearchOptions { MaxDegreeOfParallelism = 1 }, progress));
        Assert.True(parked.Wait(Guard), "the batch never reported progress");
        var writer = new Background(() => index.Remove(queryCount - 1));
        bool wrote = writer.Finishes();
        written.Set();
        var results = batch.Result<BatchSearchResults>();
        Assert.True(wrote, "the write waited for the whole batch search");
        Assert.False(parkTimedOut);
        Assert.False(index.Contains(queryCount - 1));
        Assert.InRange(firstBlock, 1, queryCount - 1);

        // Queries of the first block saw the item; those after the write did not.
        Assert.DoesNotContain(results[queryCount - 1].ToArray(), hit => hit.Id == queryCount - 1);
        if (kind == "exact")
        {
            for (int q = 0; q < queryCount; q++)
            {
                NaiveIndex state = q < firstBlock ? before : after;
                long[] expected = state.Ranked(queries.AsSpan(q * d, d)).Take(k).Select(p => p.Id).ToArray();
                Assert.Equal(expected, results[q].ToArray().Select(h => h.Id).ToArray());
            }
        }
    }

    [Fact]
    public void ASearch_DoesNotQueueBehindAWrite_ThatWaitsForAGraphAddStillLinking()
    {
        const int n = 1500, d = 16;
        float[] data = ContractData.Rows(n + 1, d, seed: 17);
        using var index = (GraphIndex)Create("graph", d, data.AsSpan(0, n * d).ToArray());

        // An add parks inside its read lock, before linking its new item.
        using var parked = new ManualResetEventSlim();
        using var release = new ManualResetEventSlim();
        bool parkTimedOut = false;
        index.DuringLinking = () =>
        {
            parked.Set();
            parkTimedOut = !release.Wait(Guard);
        };
        var adder = new Background(() => index.Add(n, data.AsSpan(n * d, d)));
        Assert.True(parked.Wait(Guard), "the add never reached its linking");
        index.DuringLinking = null;

        // A removal arrives and waits for the linking; a search must not queue behind it.
        (Background writer, Background search, bool searched) = RemoveQueuesAndSearchRuns(index, n - 1, data.AsSpan(5 * d, d), "the removal ran while an add was linking");
        release.Set();
        adder.Result<object>();
        writer.Result<object>();
        Assert.True(searched, "the search queued behind a write that waited for an add's linking");
        Assert.False(parkTimedOut);
        Assert.Equal(5, search.Result<SearchHit[]>()[0].Id);
        Assert.True(index.Contains(n));
        Assert.False(index.Contains(n - 1));
        Assert.Equal(n, index.Search(data.AsSpan(n * d, d), 1, new SearchOptions { SearchWidth = 64 })[0].Id);
    }

    [Theory]
    [MemberData(nameof(Kinds))]
    public void ASearch_DoesNotQueueBehindAWrite_ThatWaitsForABatchQuery(string kind)
    {
        const int n = 1500, d = 16;
        float[] data = ContractData.Rows(n, d, seed: 13);
        using VectorIndex index = Create(kind, d, data);

        // The batch's filter parks its first call, inside a query that holds the read lock.
        using var parked = new ManualResetEventSlim();
        using var release = new ManualResetEventSlim();
        int calls = 0;
        bool parkTimedOut = false;
        var options = new SearchOptions
        {
            MaxDegreeOfParallelism = 1,
            Filter = id =>
            {
                if (Interlocked.Increment(ref calls) == 1)
                {
                    parked.Set();
                    parkTimedOut = !release.Wait(Guard);
                }

                return true;
            },
        };
        var batch = new Background(() => index.SearchBatch(data.AsSpan(0, 4 * d), 3, options));
        Assert.True(parked.Wait(Guard), "the batch never called its filter");

        // A write arrives and waits for the batch query; a search must not queue behind it.
        (Background writer, Background search, bool searched) = RemoveQueuesAndSearchRuns(index, n - 1, data.AsSpan(5 * d, d), "the write ran while a batch query held the read lock");
        release.Set();
        var results = batch.Result<BatchSearchResults>();
        writer.Result<object>();
        Assert.True(searched, "the search queued behind a write that waited for a batch query");
        Assert.False(parkTimedOut);
        Assert.Equal(5, search.Result<SearchHit[]>()[0].Id);
        Assert.False(index.Contains(n - 1));
        Assert.Equal(0, results[0][0].Id);
    }

    [Theory]
    [MemberData(nameof(Kinds))]
    public void ASearch_Completes_WhileASaveIsParked_WithAWriteQueuedBehindIt(string kind)
    {
        // Over 1 MiB of rows, so the save reaches its stream while it still reads the index (smaller writes are gathered).
        const int n = 6000, d = 64;
        float[] data = ContractData.Rows(n, d, seed: 7);
        using VectorIndex index = Create(kind, d, data);
        using var destination = new ParkingStream();
        var save = new Background(() => IndexFile.Save(index, destination));
        Assert.True(destination.Parked.Wait(Guard), "the save never wrote");

        // A write arrives and waits for the save; a search must not queue behind it.
        (Background writer, Background search, bool searched) = RemoveQueuesAndSearchRuns(index, 0, data.AsSpan(5 * d, d), "the write ran while the save was reading the index");
        destination.Release();
        save.Result<object>();
        writer.Result<object>();
        Assert.True(searched, "the search waited for the save");
        Assert.Equal(5, search.Result<SearchHit[]>()[0].Id);

        // The file holds the state the save started from; the write landed after it.
        Assert.False(index.Contains(0));
        using var saved = new MemoryStream(destination.Written);
        using IVectorIndex loaded = IndexFile.Load(saved);
        Assert.Equal(n, loaded.Count);
        Assert.True(loaded.Contains(0));
    }

    [Theory]
    [MemberData(nameof(Kinds))]
    public void ASearch_Completes_WhileACompactionRebuilds(string kind)
    {
        const int n = 3000, d = 16;
        float[] data = ContractData.Rows(n, d, seed: 11);
        using VectorIndex index = Create(kind, d, data);
        for (int id = 0; id < n; id += 4)
        {
            index.Remove(id);
        }

        // The graph reports progress from the workers linking the new graph; the other kinds once, after the swap, so
        // for them this only checks that compaction still reports and keeps every item.
        Background? search = null;
        int reports = 0;
        bool searched = true;
        var progress = new SynchronousProgress<int>(_ =>
        {
            if (Interlocked.Increment(ref reports) == 1)
            {
                search = new Background(() => index.Search(data.AsSpan(5 * d, d), 1, new SearchOptions { SearchWidth = 64 }));
                searched = search.Finishes();
            }
        });
        index.Compact(progress);
        Assert.True(searched, "the search waited for the compaction");
        Assert.NotNull(search);
        Assert.Equal(5, search!.Result<SearchHit[]>()[0].Id);
        Assert.Equal(n - (n / 4), index.Count);
        for (int id = 1; id < n; id += 97)
        {
            Assert.Equal(id % 4 != 0, index.Contains(id));
        }
    }

    [Fact]
    public void Searches_RunBetweenTheStepsOfTheGraphsGlobalPass()
    {
        const int n = 4000, d = 16;
        float[] data = ClusteredData.Generate(n, d, 40, 0.2f, seed: 29);
        using var graph = GraphIndexTests.Build(DistanceMetric.SquaredEuclidean, d, data, new GraphIndexOptions { MaxDegreeOfParallelism = 1 });
        graph.FullPassDivisor = 0;
        for (int id = 0; id < n; id += 3)
        {
            graph.Remove(id);
        }

        Assert.True(graph.PendingWaypoints > 0, "the removals left nothing for the pass to repair");
        var wide = new SearchOptions { SearchWidth = 400 };
        int steps = 0, found = 0;
        bool blocked = false;
        graph.BetweenPassSteps = () =>
        {
            // Another thread, as a caller's search would be: it must not wait for the pass to end.
            if (blocked)
            {
                return;
            }

            long id = 1 + (3 * (steps % 1000));
            steps++;
            var search = new Background(() => graph.Search(data.AsSpan((int)id * d, d), 1, wide));
            if (!search.Finishes())
            {
                blocked = true;
                return;
            }

            found += search.Result<SearchHit[]>()[0].Id == id ? 1 : 0;
        };
        graph.RunFullPass();
        graph.BetweenPassSteps = null;
        Assert.False(blocked, "a search waited for the global pass");
        Assert.True(steps > 0);
        Assert.Equal(steps, found);
        Assert.Equal(0, graph.PendingWaypoints);
        GraphChecks.AssertSound(graph);
    }

    [Fact]
    public void Searches_RunBetweenTheStepsOfARemovalsRepair_AndNeverReturnARemovedItem()
    {
        const int n = 4000, d = 16;
        float[] data = ClusteredData.Generate(n, d, 40, 0.2f, seed: 31);
        using var graph = GraphIndexTests.Build(DistanceMetric.SquaredEuclidean, d, data, new GraphIndexOptions { MaxDegreeOfParallelism = 1 });
        graph.FullPassDivisor = 0;
        long[] removed = [.. Enumerable.Range(0, n).Where(i => i % 3 == 0).Select(i => (long)i)];
        var gone = new HashSet<long>(removed);
        var wide = new SearchOptions { SearchWidth = 400 };
        int steps = 0, found = 0, leaked = 0;
        bool blocked = false;
        Background? add = null;
        graph.BetweenRepairSteps = () =>
        {
            // Another thread, as a caller's search would be: it must not wait for the repair to end.
            if (blocked)
            {
                return;
            }

            long live = 1 + (3 * (steps % 1000));
            long dead = 3 * (steps % 1000);
            steps++;
            var search = new Background(() => (graph.Search(data.AsSpan((int)live * d, d), 1, wide), graph.Search(data.AsSpan((int)dead * d, d), 10, wide)));
            if (!search.Finishes())
            {
                blocked = true;
                return;
            }

            (SearchHit[] own, SearchHit[] near) = search.Result<(SearchHit[], SearchHit[])>();
            found += own[0].Id == live ? 1 : 0;
            leaked += near.Count(h => gone.Contains(h.Id));

            // A write arriving mid-repair queues behind it and lands after it.
            add ??= new Background(() => graph.Add(n, data.AsSpan(d, d)));
        };
        graph.RemoveRange(removed);
        graph.BetweenRepairSteps = null;
        Assert.False(blocked, "a search waited for a removal's repair");
        Assert.True(steps > 1, $"the repair ran in {steps} step(s)");
        Assert.Equal(steps, found);
        Assert.Equal(0, leaked);
        Assert.NotNull(add);
        add.Result<object?>();
        Assert.Equal(n - removed.Length + 1, graph.Count);
        foreach (long id in removed)
        {
            Assert.False(graph.Contains(id));
        }

        GraphChecks.AssertSoundAfterSingleChanges(graph);
        for (int i = 1; i < n; i += 3)
        {
            Assert.DoesNotContain(graph.Search(data.AsSpan(i * d, d), 10, wide), h => gone.Contains(h.Id));
        }
    }

    // A removal of `id` arrives and must wait (for the parked operation); then a search for `query` starts, which must
    // not queue behind the waiting write. Returns both, and whether the search finished while the write waited.
    private static (Background Writer, Background Search, bool Searched) RemoveQueuesAndSearchRuns(VectorIndex index, long id, ReadOnlySpan<float> query, string ranEarly)
    {
        var writer = new Background(() => index.Remove(id));
        Assert.True(SpinWait.SpinUntil(() => index.WaitingWriters > 0 || writer.IsCompleted, Guard));
        Assert.False(writer.IsCompleted, ranEarly);
        float[] q = query.ToArray();
        var search = new Background(() => index.Search(q, 3, new SearchOptions { SearchWidth = 64 }));
        return (writer, search, search.Finishes());
    }

    private static VectorIndex Create(string kind, int d, float[] data)
    {
        VectorIndex index = kind switch
        {
            "exact" => new ExactIndex(d, DistanceMetric.SquaredEuclidean),
            "graph" => new GraphIndex(d, DistanceMetric.SquaredEuclidean, new GraphIndexOptions { MaxDegreeOfParallelism = 2 }),
            _ => new InvertedFileIndex(d, DistanceMetric.SquaredEuclidean, ContractInvertedFileOptions.For(VectorEncoding.Float32, d)),
        };
        index.Train(data);
        index.AddRange(GraphIndexTests.Ids(data.Length / d), data);
        return index;
    }

    /// <summary>Work on a thread of its own, joined with the guard (a blocked operation fails the test instead of hanging it).</summary>
    private sealed class Background
    {
        private readonly Thread _thread;
        private object? _result;
        private Exception? _error;

        public Background(Func<object?> work)
        {
            _thread = new Thread(() =>
            {
                try
                {
                    _result = work();
                }
                catch (Exception e)
                {
                    _error = e;
                }
            })
            { IsBackground = true };
            _thread.Start();
        }

        public Background(Action work)
            : this(() =>
            {
                work();
                return null;
            })
        {
        }

        public bool IsCompleted => !_thread.IsAlive;

        /// <summary>Whether the work ends within the guard.</summary>
        public bool Finishes() => _thread.Join(Guard);

        /// <summary>The work's result; rethrows its exception; fails when it does not end within the guard.</summary>
        public T Result<T>()
        {
            Assert.True(_thread.Join(Guard), "the operation did not end");
            if (_error is not null)
            {
                System.Runtime.ExceptionServices.ExceptionDispatchInfo.Throw(_error);
            }

            return (T)_result!;
        }
    }

    /// <summary>A memory stream whose first write waits until <see cref="Release"/> (or the guard).</summary>
    private sealed class ParkingStream : Stream
    {
        private readonly MemoryStream _inner = new();
        private readonly ManualResetEventSlim _release = new();
        private int _writes;

        public ManualResetEventSlim Parked { get; } = new();

        public byte[] Written => _inner.ToArray();

        public override bool CanRead => false;

        public override bool CanSeek => false;

        public override bool CanWrite => true;

        public override long Length => _inner.Length;

        public override long Position
        {
            get => _inner.Position;
            set => throw new NotSupportedException();
        }

        public void Release() => _release.Set();

        public override void Write(byte[] buffer, int offset, int count) => Write(buffer.AsSpan(offset, count));

        public override void Write(ReadOnlySpan<byte> buffer)
        {
            if (Interlocked.Increment(ref _writes) == 1)
            {
                Parked.Set();
                _release.Wait(Guard);
            }

            _inner.Write(buffer);
        }

        public override void Flush()
        {
        }

        public override int Read(byte[] buffer, int offset, int count) => throw new NotSupportedException();

        public override long Seek(long offset, SeekOrigin origin) => throw new NotSupportedException();

        public override void SetLength(long value) => throw new NotSupportedException();

        protected override void Dispose(bool disposing)
        {
            if (disposing)
            {
                _inner.Dispose();
                _release.Dispose();
                Parked.Dispose();
            }

            base.Dispose(disposing);
        }
    }
}
