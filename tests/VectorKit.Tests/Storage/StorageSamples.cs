using VectorKit.Distance;
using VectorKit.Indexes.Exact;
using VectorKit.Indexes.Graph;
using VectorKit.Tests.TestData;

namespace VectorKit.Tests.Storage;

/// <summary>Small deterministic indexes for the storage tests.</summary>
internal static class StorageSamples
{
    public static ExactIndex Exact(int count = 12, int dimension = 3, DistanceMetric metric = DistanceMetric.SquaredEuclidean, int seed = 7)
    {
        var index = new ExactIndex(dimension, metric);
        float[] data = ClusteredData.Generate(count, dimension, 3, 0.3f, seed);
        index.AddRange(Enumerable.Range(0, count).Select(i => 1000L + (i * 7)).ToArray(), data);
        return index;
    }

    /// <summary>A small graph with upper layers (few links make levels ≥ 1 common) and two removed items.</summary>
    public static GraphIndex Graph(int count = 40, int dimension = 4, DistanceMetric metric = DistanceMetric.SquaredEuclidean, int seed = 11, bool remove = true)
    {
        var graph = new GraphIndex(dimension, metric, new GraphIndexOptions { LinksPerNode = 3, BuildWidth = 16, Seed = seed, BuildParallelism = 1 });
        float[] data = ClusteredData.Generate(count, dimension, 4, 0.3f, seed);
        graph.AddRange(Enumerable.Range(0, count).Select(i => 500L + (i * 3)).ToArray(), data);
        if (remove && count > 4)
        {
            graph.RemoveRange([500L, 500L + 9]);
        }

        return graph;
    }
}
