using VectorKit.Distance;
using VectorKit.Indexes.Exact;
using VectorKit.Reranking;

namespace VectorKit.Tests.Reranking;

/// <summary>
/// A synthetic world whose scorer's exhaustive top k is known in closed form. Items are ids 0..N−1 on a line; a query
/// is a position c = m + 0.25. The scorer is −|id − c|, so its order is m, m+1, m−1, m+2, m−2, … (distances 0.25, 0.75,
/// 1.25, …, never tied). Retrieval only sees a noisy embedding, (id/N + σg, σh) with seeded Gaussians g and h, so
/// the index's order is not the scorer's: depth is needed to keep the true top k.
/// </summary>
internal sealed class LineWorld
{
    public LineWorld(int count, double noiseInIds, int seed)
    {
        Count = count;
        var random = new Random(seed);
        Vectors = new float[count * 2];
        for (int i = 0; i < count; i++)
        {
            Vectors[2 * i] = (float)((i + (noiseInIds * Gaussian(random))) / count);
            Vectors[(2 * i) + 1] = (float)(noiseInIds * Gaussian(random) / count);
        }
    }

    public int Count { get; }

    public float[] Vectors { get; }

    public ExactIndex BuildIndex()
    {
        var index = new ExactIndex(2, DistanceMetric.SquaredEuclidean);
        index.AddRange(Enumerable.Range(0, Count).Select(i => (long)i).ToArray(), Vectors);
        return index;
    }

    public double[] Queries(int n, int seed)
    {
        var random = new Random(seed);
        return Enumerable.Range(0, n).Select(_ => random.Next(Count) + 0.25).ToArray();
    }

    /// <summary>The scorer's top k in closed form: m, m+1, m−1, m+2, m−2, … within [0, N).</summary>
    public long[] ClosedFormTop(double centre, int k)
    {
        long m = (long)Math.Floor(centre);
        var top = new List<long>(k);
        for (long step = 0; top.Count < k && step <= Count; step++)
        {
            if (m + step < Count && m + step >= 0)
            {
                top.Add(m + step);
            }

            if (top.Count < k && step > 0 && m - step >= 0 && m - step < Count)
            {
                top.Add(m - step);
            }
        }

        // m+s lies s − 0.25 from the centre, m−s lies s + 0.25 and m+s+1 lies s + 0.75: the loop's order is the scorer's.
        return top.ToArray();
    }

    private static double Gaussian(Random random)
        => Math.Sqrt(-2 * Math.Log(1 - random.NextDouble())) * Math.Cos(2 * Math.PI * random.NextDouble());

    /// <summary>Score −|id − c|; retrieval vector (c/N, 0).</summary>
    public sealed class Scorer(int count) : PairwiseScorer<double>
    {
        private long _calls;

        public long Pairs => Interlocked.Read(ref _calls);

        public override void WriteRetrievalVector(double query, Span<float> destination)
        {
            destination[0] = (float)(query / count);
            destination[1] = 0;
        }

        public override int Score(double query, ReadOnlySpan<long> candidateIds, Span<float> scores)
        {
            for (int i = 0; i < candidateIds.Length; i++)
            {
                scores[i] = (float)-Math.Abs(candidateIds[i] - query);
            }

            Interlocked.Add(ref _calls, candidateIds.Length);
            return candidateIds.Length;
        }
    }
}
