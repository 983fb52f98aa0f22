using FsCheck.Xunit;
using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using Xunit;

namespace VectorKit.Tests.Indexes;

/// <summary>Invariants of the exact index on arbitrary small inputs, checked against <see cref="NaiveIndex"/>.</summary>
public class ExactIndexProperties
{
    [Property(MaxTest = 300)]
    public void ReturnsExactlyTheKNearest_TiesById(int[] components, byte dimensionSeed, byte kSeed, bool innerProduct, int querySeed)
    {
        // Small integer components: float sums are exact, so the comparison with the double oracle is exact and
        // ties (frequent with few distinct values) must be broken by id exactly as the oracle breaks them.
        DistanceMetric metric = innerProduct ? DistanceMetric.InnerProduct : DistanceMetric.SquaredEuclidean;
        int d = 1 + (dimensionSeed % 9);
        int n = components.Length / d;
        int k = 1 + (kSeed % 12);
        using var index = new ExactIndex(d, metric);
        var naive = new NaiveIndex(d, metric);
        float[] data = components.Take(n * d).Select(c => (float)(Math.Abs(c % 7) - 3)).ToArray();
        long[] ids = Enumerable.Range(0, n).Select(i => (long)((i * 37) % 101) - 50 + (101 * (i / 101))).ToArray();
        index.AddRange(ids, data);
        for (int i = 0; i < n; i++)
        {
            naive.Add(ids[i], data.AsSpan(i * d, d));
        }

        var random = new Random(querySeed);
        float[] query = Enumerable.Range(0, d).Select(_ => (float)random.Next(-3, 4)).ToArray();
        var expected = naive.Ranked(query).Take(k).ToList();
        ExactIndexTests.AssertSameRanking(metric, expected, index.Search(query, k));
        Assert.Equal(index.Search(query, k), index.SearchBatch(query, k)[0].ToArray());
    }

    [Property(MaxTest = 200)]
    public void RandomAddRemoveSequences_AgreeWithANaiveModel(int[] operations, int querySeed)
    {
        const int d = 3;
        using var index = new ExactIndex(d, DistanceMetric.SquaredEuclidean);
        var naive = new NaiveIndex(d, DistanceMetric.SquaredEuclidean);
        var live = new List<long>();
        foreach (int op in operations)
        {
            long id = Math.Abs(op % 23);
            float[] vector = [op % 5, (op / 5) % 5, (op / 25) % 5];
            if (op % 3 == 0 && live.Count > 0)
            {
                long victim = live[Math.Abs(op) % live.Count];
                index.Remove(victim);
                naive.Remove(victim);
                live.Remove(victim);
            }
            else if (naive.Contains(id))
            {
                // A duplicate add is rejected and changes nothing.
                Assert.Throws<ArgumentException>(() => index.Add(id, vector));
            }
            else
            {
                index.Add(id, vector);
                naive.Add(id, vector);
                live.Add(id);
            }

            Assert.Equal(naive.Count, index.Count);
        }

        foreach (long id in live)
        {
            Assert.True(index.Contains(id));
        }

        var random = new Random(querySeed);
        float[] query = [random.Next(-1, 5), random.Next(-1, 5), random.Next(-1, 5)];
        ExactIndexTests.AssertSameRanking(DistanceMetric.SquaredEuclidean, naive.Ranked(query).Take(5).ToList(), index.Search(query, 5));
    }
}
