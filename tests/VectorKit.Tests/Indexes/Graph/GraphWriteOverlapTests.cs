using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Graph;
using VectorKit.Tests.TestData;

namespace VectorKit.Tests.Indexes.Graph;

/// <summary>
/// A compaction asked for while an <c>AddRange</c> is between its store step and its linking, or linking (the parts
/// that run beside other work): the compaction must wait for the batch, since it renumbers the slots the batch links.
/// </summary>
/// <remarks>Found by the concurrent stress run, where the batch failed with an out-of-range slot and left links out of
/// range. The batch is parked at a hook or in its progress callback, so the overlap is certain, not a matter of
/// timing.</remarks>
public class GraphWriteOverlapTests
{
    [Theory]
    [InlineData(VectorEncoding.Float32, true)]
    [InlineData(VectorEncoding.Float32, false)]
    [InlineData(VectorEncoding.Scalar8Bit, true)]
    [InlineData(VectorEncoding.Scalar8Bit, false)]
    public async Task Compact_RequestedDuringABatch_WaitsForTheBatch(VectorEncoding encoding, bool parkAfterStore)
    {
        const int Dimension = 8;
        const int Before = 400;
        const int Batch = 300;
        float[] data = ClusteredData.Generate(Before + Batch, Dimension, 6, 0.3f, seed: 31);
        using var graph = new GraphIndex(Dimension, DistanceMetric.SquaredEuclidean, new GraphIndexOptions
        {
            LinksPerNode = 6,
            BuildWidth = 32,
            Seed = 4,
            MaxDegreeOfParallelism = 1,
            Encoding = encoding,
        });
        if (encoding == VectorEncoding.Scalar8Bit)
        {
            graph.Train(data);
        }

        graph.AddRange([.. Enumerable.Range(0, Before).Select(i => (long)i)], data.AsSpan(0, Before * Dimension));
        graph.RemoveRange([.. Enumerable.Range(0, Before / 4).Select(i => (long)(i * 4))]);

        using var linking = new ManualResetEventSlim();
        using var release = new ManualResetEventSlim();
        var parkOnce = new ParkingProgress(linking, release);
        if (parkAfterStore)
        {
            graph.AfterBatchStored = () => parkOnce.Report(0);
        }

        long[] batchIds = [.. Enumerable.Range(Before, Batch).Select(i => (long)i)];
        float[] batchVectors = data[(Before * Dimension)..];
        Task adding = Task.Run(() => graph.AddRange(batchIds, batchVectors, parkOnce));
        Assert.True(linking.Wait(TimeSpan.FromSeconds(60)), "the batch never reached its parking point");

        Task compacting = Task.Run(() => graph.Compact());

        // The compaction may not finish while the batch is parked; give it the chance to, then let the batch go.
        Task first = await Task.WhenAny(compacting, Task.Delay(300));
        Assert.NotSame(compacting, first);
        release.Set();
        await adding.WaitAsync(TimeSpan.FromSeconds(120));
        await compacting.WaitAsync(TimeSpan.FromSeconds(120));

        int live = Before - (Before / 4) + Batch;
        Assert.Equal(live, graph.Count);
        GraphChecks.AssertSound(graph);
        var stored = new float[Dimension];
        var wide = new SearchOptions { SearchWidth = live };
        for (int i = 0; i < Before + Batch; i++)
        {
            bool removed = i < Before && i % 4 == 0;
            Assert.Equal(!removed, graph.TryGetVector(i, stored));
            if (!removed && encoding == VectorEncoding.Float32)
            {
                Assert.Equal(data.AsSpan(i * Dimension, Dimension).ToArray(), stored);
                Assert.Equal(i, graph.Search(stored, 1, wide)[0].Id);
            }
        }
    }

    // Parks the first call (after the store step, or the first progress report while the batch links) until released.
    private sealed class ParkingProgress(ManualResetEventSlim reached, ManualResetEventSlim release) : IProgress<int>
    {
        private int _reports;

        public void Report(int value)
        {
            if (Interlocked.Increment(ref _reports) == 1)
            {
                reached.Set();
                release.Wait();
            }
        }
    }
}
