using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Indexes.Graph;
using VectorKit.Indexes.InvertedFile;
using VectorKit.Quantization;
using VectorKit.Tests.TestData;

namespace VectorKit.Tests.Persistence;

/// <summary>Small deterministic indexes for the storage tests.</summary>
internal static class PersistenceSamples
{
    public static ExactIndex Exact(int count = 12, int dimension = 3, DistanceMetric metric = DistanceMetric.SquaredEuclidean, int seed = 7)
    {
        var index = new ExactIndex(dimension, metric);
        float[] data = ClusteredData.Generate(count, dimension, 3, 0.3f, seed);
        index.AddRange(Enumerable.Range(0, count).Select(i => 1000L + (i * 7)).ToArray(), data);
        return index;
    }

    /// <summary>A small exact index under 8-bit storage, trained on its own rows, with one removed item.</summary>
    public static ExactIndex ExactScalar(
        int count = 12,
        int dimension = 3,
        DistanceMetric metric = DistanceMetric.SquaredEuclidean,
        int rescoreDepth = 0,
        int seed = 7,
        FullVectorLocation fullVectors = FullVectorLocation.InIndexMemory)
    {
        var index = new ExactIndex(dimension, metric, new ExactIndexOptions { Encoding = VectorEncoding.Scalar8Bit, RescoreDepth = rescoreDepth, FullVectors = fullVectors });
        float[] data = ClusteredData.Generate(count, dimension, 3, 0.3f, seed);
        index.Train(data);
        index.AddRange(Enumerable.Range(0, count).Select(i => 1000L + (i * 7)).ToArray(), data);
        index.Remove(1000 + 7);
        return index;
    }

    /// <summary>A small graph with upper layers (few links make levels ≥ 1 common) and two removed items.</summary>
    public static GraphIndex Graph(int count = 40, int dimension = 4, DistanceMetric metric = DistanceMetric.SquaredEuclidean, int seed = 11, bool remove = true)
    {
        var graph = new GraphIndex(dimension, metric, new GraphIndexOptions { LinksPerNode = 3, BuildWidth = 16, Seed = seed, MaxDegreeOfParallelism = 1 });
        float[] data = ClusteredData.Generate(count, dimension, 4, 0.3f, seed);
        graph.AddRange(Enumerable.Range(0, count).Select(i => 500L + (i * 3)).ToArray(), data);
        if (remove && count > 4)
        {
            graph.RemoveRange([500L, 500L + 9]);
        }

        return graph;
    }

    /// <summary>
    /// A small graph under 8-bit codes (trained on its own rows), with full vectors when <paramref name="rescoreDepth"/>
    /// is positive (in memory, or none stored when <paramref name="fullVectors"/> is external), and two removed items.
    /// </summary>
    public static GraphIndex ScalarGraph(
        int count = 40,
        int dimension = 4,
        DistanceMetric metric = DistanceMetric.SquaredEuclidean,
        int rescoreDepth = 0,
        int seed = 11,
        FullVectorLocation fullVectors = FullVectorLocation.InIndexMemory)
    {
        var graph = new GraphIndex(dimension, metric, new GraphIndexOptions { LinksPerNode = 3, BuildWidth = 16, Seed = seed, MaxDegreeOfParallelism = 1, Encoding = VectorEncoding.Scalar8Bit, RescoreDepth = rescoreDepth, FullVectors = fullVectors });
        float[] data = ClusteredData.Generate(count, dimension, 4, 0.3f, seed);
        graph.Train(data);
        graph.AddRange(Enumerable.Range(0, count).Select(i => 500L + (i * 3)).ToArray(), data);
        graph.RemoveRange([500L, 500L + 9]);
        return graph;
    }

    /// <summary>
    /// A small trained inverted file (4 lists) with ids 200 + 5i and two removed items; trained on its own rows, or on
    /// 256 rows of the same clusters under product codes (which need 256 training rows). Product codes have
    /// <paramref name="productCodeBytes"/> sub-spaces (0: one per component).
    /// </summary>
    public static InvertedFileIndex InvertedFile(
        VectorEncoding storage,
        DistanceMetric metric = DistanceMetric.SquaredEuclidean,
        int count = 30,
        int dimension = 3,
        int rescoreDepth = 0,
        int seed = 13,
        bool remove = true,
        FullVectorLocation fullVectors = FullVectorLocation.InIndexMemory,
        SubspaceRotation rotation = SubspaceRotation.None,
        int productCodeBytes = 0,
        ProductCodeLayout layout = ProductCodeLayout.BytePerSubspace)
    {
        var options = new InvertedFileOptions
        {
            ProductCodeLayout = layout,
            ProductCodeRotation = rotation,
            ListCount = 4,
            SearchWidth = 2,
            Encoding = storage,
            ProductCodeBytes = productCodeBytes == 0 ? dimension : productCodeBytes,
            RescoreDepth = rescoreDepth,
            MaxIterations = 3,
            Seed = seed,
            MaxDegreeOfParallelism = 1,
            FullVectors = fullVectors,
        };
        var index = new InvertedFileIndex(dimension, metric, options);
        float[] data = ClusteredData.Generate(count, dimension, 4, 0.3f, seed);
        index.Train(storage == VectorEncoding.ProductCodes ? ClusteredData.Generate(256, dimension, 4, 0.3f, seed + 1) : data);
        index.AddRange(InvertedFileIds(count), data);
        if (remove && count > 4)
        {
            index.Remove(200);
            index.Remove(200 + (5 * 7));
        }

        return index;
    }

    public static long[] InvertedFileIds(int count) => Enumerable.Range(0, count).Select(i => 200L + (5 * i)).ToArray();
}
