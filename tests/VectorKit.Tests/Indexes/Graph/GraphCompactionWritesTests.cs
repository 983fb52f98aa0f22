using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Graph;
using VectorKit.Internal;
using VectorKit.Tests.Indexes.Contract;
using VectorKit.Tests.TestData;

namespace VectorKit.Tests.Indexes.Graph;

/// <summary>
/// Writes made while a compaction rebuilds the graph: they must not wait for the rebuild, and every one of them must be
/// in the compacted graph, against a model of the acknowledged writes.
/// </summary>
/// <remarks>
/// The rebuild is parked at a hook (or in its progress callback) while another thread writes, so the overlap is certain,
/// not a matter of timing; a write that waited for the rebuild would never finish there, and the guard fails the test.
/// </remarks>
public class GraphCompactionWritesTests
{
    private const int Dimension = 8;
    private static readonly TimeSpan Guard = TimeSpan.FromSeconds(60);

    public static TheoryData<VectorEncoding, DistanceMetric> Variants => new()
    {
        { VectorEncoding.Float32, DistanceMetric.SquaredEuclidean },
        { VectorEncoding.Float32, DistanceMetric.Cosine },
        { VectorEncoding.Scalar8Bit, DistanceMetric.SquaredEuclidean },
    };

    [Theory]
    [MemberData(nameof(Variants))]
    public void Writes_LandDuringTheRebuild_AndAreInTheCompactedGraph(VectorEncoding encoding, DistanceMetric metric)
    {
        var fixture = new Fixture(encoding, metric, items: 600, spare: 400);
        bool linkedOnce = false;

        // Before the linking: adds, a replace and removes, the last of an item added during the rebuild itself.
        fixture.Graph.DuringCompactionRebuild = () => WriteOnAnotherThread(() =>
        {
            fixture.AddRange(600, 150);
            fixture.AddOrReplace(1, 750);
            fixture.Remove(2);
            fixture.RemoveRange([600, 601]);
        });

        // While the workers link: more of each, from outside the workers.
        var progress = new SynchronousProgress<int>(_ =>
        {
            if (!Interlocked.Exchange(ref linkedOnce, true))
            {
                WriteOnAnotherThread(() =>
                {
                    fixture.AddRange(751, 100);
                    fixture.AddOrReplace(4, 860);
                    fixture.AddOrReplace(602, 861);
                    fixture.Remove(5);
                });
            }
        });

        fixture.Graph.Compact(progress);

        Assert.True(linkedOnce, "the rebuild reported no progress");
        fixture.AssertMatchesModel();
    }

    [Theory]
    [MemberData(nameof(Variants))]
    public async Task AWriterThatNeverStops_IsCaughtUp(VectorEncoding encoding, DistanceMetric metric)
    {
        var fixture = new Fixture(encoding, metric, items: 1500, spare: 4000);
        using var started = new ManualResetEventSlim();
        using var compacted = new ManualResetEventSlim();

        // One writer, so the model's order is the order of acknowledgement; it runs until the compaction has returned.
        Task writer = Task.Run(() =>
        {
            var random = new Random(17);
            int next = 1500;
            for (int op = 0; !compacted.IsSet && next < 1500 + 4000; op++)
            {
                switch (op % 3)
                {
                    case 0:
                        fixture.AddRange(next, 1);
                        next++;
                        break;
                    case 1:
                        fixture.RemoveRange([fixture.AnyLive(random)]);
                        break;
                    default:
                        fixture.AddOrReplace(fixture.AnyLive(random), random.Next(1500, 5500));
                        break;
                }

                if (op == 60)
                {
                    started.Set();
                }
            }

            started.Set();
        });

        // The rebuild starts only once the writer is under way, so writes land in every phase of it.
        fixture.Graph.DuringCompactionRebuild = () => Assert.True(started.Wait(Guard), "the writer did not start");
        fixture.Graph.Compact();
        compacted.Set();
        await writer.WaitAsync(Guard);

        fixture.AssertMatchesModel();
    }

    [Fact]
    public void ACancelledCompaction_KeepsTheWritesMadeDuringIt()
    {
        var fixture = new Fixture(VectorEncoding.Float32, DistanceMetric.SquaredEuclidean, items: 500, spare: 200);
        using var cancel = new CancellationTokenSource();
        long before = fixture.Graph.MemoryBytes;
        fixture.Graph.DuringCompactionRebuild = () =>
        {
            WriteOnAnotherThread(() =>
            {
                fixture.AddRange(500, 100);
                fixture.Remove(7);
                fixture.AddOrReplace(8, 650);
            });
            cancel.Cancel();
        };

        Assert.ThrowsAny<OperationCanceledException>(() => fixture.Graph.Compact(cancellationToken: cancel.Token));

        // Nothing was released, and the index goes on logging nothing: a later write and compaction behave.
        Assert.True(fixture.Graph.MemoryBytes >= before);
        fixture.AssertMatchesModel();
        fixture.Graph.DuringCompactionRebuild = null;
        fixture.AddRange(600, 50);
        fixture.Graph.Compact();
        fixture.AssertMatchesModel();
    }

    [Fact]
    public void DisposingDuringTheRebuild_EndsTheCompactionWithObjectDisposed()
    {
        var fixture = new Fixture(VectorEncoding.Float32, DistanceMetric.SquaredEuclidean, items: 300, spare: 0);
        fixture.Graph.DuringCompactionRebuild = () => WriteOnAnotherThread(fixture.Graph.Dispose);

        Assert.Throws<ObjectDisposedException>(() => fixture.Graph.Compact());
        Assert.Throws<ObjectDisposedException>(() => fixture.Graph.Count);
    }

    private static void WriteOnAnotherThread(Action write)
    {
        Task task = Task.Run(write);
        Assert.True(task.Wait(Guard), "a write waited for the compaction's rebuild");
        task.GetAwaiter().GetResult();
    }

    /// <summary>A graph with removed items, and the model of what it holds: every acknowledged write, in order.</summary>
    private sealed class Fixture
    {
        private readonly float[] _data;
        private readonly Dictionary<long, float[]> _live = [];
        private readonly HashSet<long> _removed = [];
        private readonly object _sync = new();

        public Fixture(VectorEncoding encoding, DistanceMetric metric, int items, int spare)
        {
            _data = ClusteredData.Generate(items + spare + 1, Dimension, 6, 0.3f, seed: 41);
            Graph = new GraphIndex(Dimension, metric, new GraphIndexOptions
            {
                LinksPerNode = 6,
                BuildWidth = 32,
                Seed = 5,
                MaxDegreeOfParallelism = 2,
                Encoding = encoding,
            });
            if (encoding == VectorEncoding.Scalar8Bit)
            {
                Graph.Train(_data);
            }

            AddRange(0, items);
            for (long id = 0; id < items; id += 3)
            {
                Remove(id);
            }
        }

        public GraphIndex Graph { get; }

        public void AddRange(int first, int count)
        {
            long[] ids = [.. Enumerable.Range(first, count).Select(i => (long)i)];
            Graph.AddRange(ids, _data.AsSpan(first * Dimension, count * Dimension));
            lock (_sync)
            {
                foreach (long id in ids)
                {
                    _live[id] = Stored((int)id);
                }
            }
        }

        // Gives `id` the vector of data row `row`.
        public void AddOrReplace(long id, int row)
        {
            Graph.AddOrReplace(id, Row(row));
            lock (_sync)
            {
                _live[id] = Stored(row);
                _removed.Remove(id);
            }
        }

        public void Remove(long id) => RemoveRange([id]);

        public void RemoveRange(long[] ids)
        {
            Graph.RemoveRange(ids);
            lock (_sync)
            {
                foreach (long id in ids)
                {
                    _live.Remove(id);
                    _removed.Add(id);
                }
            }
        }

        public long AnyLive(Random random)
        {
            lock (_sync)
            {
                return _live.Keys.ElementAt(random.Next(_live.Count));
            }
        }

        public void AssertMatchesModel()
        {
            GraphChecks.AssertSoundAfterSingleChanges(Graph);
            long[] removed = [.. _removed.Where(id => !_live.ContainsKey(id))];
            if (Graph.Metric != DistanceMetric.Cosine)
            {
                LiveItemChecks.AssertEveryLiveItemFound(Graph, _live, removed);
                return;
            }

            // The shared checks compare distances exactly, which the exact index's and the graph's cosine kernels need
            // not give to the last bit; here each stored vector, membership, and finding each item by its own vector.
            Assert.Equal(_live.Count, Graph.Count);
            Assert.All(removed, id => Assert.False(Graph.Contains(id)));
            var row = new float[Dimension];
            var wide = new SearchOptions { SearchWidth = _live.Count };
            foreach ((long id, float[] vector) in _live)
            {
                Assert.True(Graph.TryGetVector(id, row));
                Assert.Equal(vector, row);
                SearchHit best = Graph.Search(vector, 1, wide)[0];
                Assert.True(best.Id == id || _live[best.Id].AsSpan().SequenceEqual(vector), $"id {id} found as {best.Id}");
            }
        }

        // Rows of the model are as the index stores them: under cosine scaled to unit length by the routine every write
        // uses, so that the vectors read back must be equal, not merely close.
        private float[] Stored(int row)
        {
            float[] vector = Row(row);
            if (Graph.Metric == DistanceMetric.Cosine)
            {
                VectorChecks.Normalize(Row(row), vector, "row");
            }

            return vector;
        }

        private float[] Row(int row) => _data.AsSpan(row * Dimension, Dimension).ToArray();
    }
}
