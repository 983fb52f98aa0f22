using VectorKit.Distance;
using VectorKit.Indexes.Exact;

namespace VectorKit.SaveChild;

/// <summary>
/// The deterministic index the child saves, also built by the tests as their reference: uniform components from a
/// fixed-seed xorshift generator (no dependence on the runtime's <see cref="Random"/> algorithm), ids 3i + 1.
/// </summary>
public static class CrashSample
{
    public static float[] Vectors(int count, int dimension, ulong seed)
    {
        var data = new float[checked(count * dimension)];
        ulong state = seed | 1;
        for (int i = 0; i < data.Length; i++)
        {
            state ^= state << 13;
            state ^= state >> 7;
            state ^= state << 17;
            data[i] = (state >> 40) / (float)(1 << 24);
        }

        return data;
    }

    public static long Id(int row) => (3L * row) + 1;

    public static ExactIndex Build(int count, int dimension, ulong seed)
    {
        var index = new ExactIndex(dimension, DistanceMetric.SquaredEuclidean);
        long[] ids = new long[count];
        for (int i = 0; i < count; i++)
        {
            ids[i] = Id(i);
        }

        index.AddRange(ids, Vectors(count, dimension, seed));
        return index;
    }
}
