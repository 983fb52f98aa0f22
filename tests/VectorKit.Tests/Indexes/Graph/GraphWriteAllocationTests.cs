using VectorKit.Distance;
using VectorKit.Indexes.Graph;
using VectorKit.Tests.TestData;
using Xunit;

namespace VectorKit.Tests.Indexes.Graph;

/// <summary>
/// Single adds and removes allocate nothing once the index has room: every collection stops the searches running
/// beside them, and a service writing steadily (or a compaction replaying its writes one by one) would start them at
/// the rate of its writes.
/// </summary>
public class GraphWriteAllocationTests
{
    [Fact]
    public void SingleAddsAndRemoves_AllocateOnlyToGrow()
    {
        const int D = 16, N = 4_000, Warm = 300, Pairs = 300;
        float[] data = ClusteredData.Generate(N + Warm + Pairs, D, 40, 0.3f, seed: 23);
        var options = new GraphIndexOptions { InitialCapacity = 2 * (N + Warm + Pairs), MaxDegreeOfParallelism = 1 };
        using var index = new GraphIndex(D, DistanceMetric.SquaredEuclidean, options);
        index.AddRange(Enumerable.Range(0, N).Select(i => (long)i).ToArray(), data.AsSpan(0, N * D));

        // Removes the oldest live item after each add, so the count stays put and removals repair the graph around
        // items of every age. The warm-up fills this thread's scratch and pools, which then keep their room.
        long next = N, oldest = 0;
        var allocating = new List<string>();
        void Pair()
        {
            long start = GC.GetAllocatedBytesForCurrentThread();
            index.Add(next, data.AsSpan((int)next * D, D));
            long added = GC.GetAllocatedBytesForCurrentThread();
            index.Remove(oldest);
            long removed = GC.GetAllocatedBytesForCurrentThread();
            if (removed > start)
            {
                allocating.Add($"add {next}: {added - start:N0} B, remove {oldest}: {removed - added:N0} B");
            }

            next++;
            oldest++;
        }

        for (int i = 0; i < Warm; i++)
        {
            Pair();
        }

        allocating.Clear();
        for (int i = 0; i < Pairs; i++)
        {
            Pair();
        }

        // Growth is geometric, so a few pairs may grow an array (the upper layers' links, a scratch list). Before
        // single writes stopped allocating, every pair did: the uniqueness check's set, the linking loop's closure,
        // the repair's arrays.
        Assert.True(allocating.Count <= 3, $"{allocating.Count} of {Pairs} pairs allocated: {string.Join("; ", allocating)}");
        Assert.Equal(N, index.Count);
        Assert.False(index.Contains(oldest - 1));
        Assert.True(index.Contains(next - 1));
    }
}
