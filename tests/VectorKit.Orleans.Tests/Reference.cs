using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;

namespace VectorKit.Orleans.Tests;

/// <summary>Test data and the single-index reference every sharded answer is compared with.</summary>
internal static class Reference
{
    public static float[] Random(int rows, int dimension, int seed, int levels = 0)
    {
        var random = new Random(seed);
        var v = new float[rows * dimension];
        for (int i = 0; i < v.Length; i++)
        {
            // With levels, coordinates come from a few integers, so many items tie on distance.
            v[i] = levels > 0 ? random.Next(levels) : (float)((random.NextDouble() * 2) - 1);
        }

        return v;
    }

    public static long[] Ids(int count, int seed)
    {
        var random = new Random(seed);
        var ids = new HashSet<long>();
        while (ids.Count < count)
        {
            ids.Add(random.NextInt64(-1_000_000_000_000, 1_000_000_000_000));
        }

        return [.. ids];
    }

    public static ExactIndex Single(long[] ids, float[] vectors, int dimension, DistanceMetric metric = DistanceMetric.SquaredEuclidean)
    {
        var index = new ExactIndex(dimension, metric);
        index.AddRange(ids, vectors);
        return index;
    }

    public static void Equal(ReadOnlySpan<SearchHit> expected, ReadOnlySpan<SearchHit> actual, string what)
    {
        Assert.True(expected.Length == actual.Length, $"{what}: expected {expected.Length} hits, got {actual.Length}");
        for (int i = 0; i < expected.Length; i++)
        {
            Assert.True(expected[i] == actual[i], $"{what}: hit {i} expected {expected[i]}, got {actual[i]}");
        }
    }
}
