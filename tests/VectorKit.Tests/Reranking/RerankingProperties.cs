using FsCheck.Xunit;
using VectorKit.Distance;
using VectorKit.Indexes.Exact;
using VectorKit.Reranking;

namespace VectorKit.Tests.Reranking;

/// <summary>Invariants of the pipeline on arbitrary small collections.</summary>
public class RerankingProperties
{
    [Property(MaxTest = 120)]
    public void ADepthCoveringTheCollection_GivesExactlyTheExhaustiveAnswer(int[] components, byte sizeSeed, byte kSeed, byte extraDepth, int querySeed, bool exactStage)
    {
        const int d = 3;
        int n = Math.Max(1, Math.Min(components.Length / d, 1 + (sizeSeed % 60)));
        float[] data = new float[n * d];
        for (int i = 0; i < data.Length; i++)
        {
            data[i] = i < components.Length ? components[i] % 5 : i % 3;
        }

        int k = 1 + (kSeed % n);
        int depth = n + (extraDepth % 5);
        long[] ids = Enumerable.Range(0, n).Select(i => (long)((i * 31) % 97) + (97L * (i / 97))).ToArray();
        using var index = new ExactIndex(d, DistanceMetric.SquaredEuclidean);
        index.AddRange(ids, data);
        var random = new Random(querySeed);
        var query = new VectorQuery([random.Next(-4, 5), random.Next(-4, 5), random.Next(-4, 5)], querySeed);
        var scorer = new HashScorer(d);
        var options = new RerankingOptions { FinalCount = k, RetrievalDepth = depth, ExactRescoringDepth = exactStage ? depth : null, ScoringBatchSize = 1 + (Math.Abs(querySeed) % 7) };

        RerankedHit[] hits = new RerankingPipeline<VectorQuery>(index, scorer, options).Rerank(query);
        long[] exhaustive = RerankingCalibration.ScoreEverything(scorer, [query], ids, k)[0];

        // An independent reference: score every id directly, sort by (score desc, id asc).
        long[] reference = ids.OrderByDescending(id => (float)((((id * 7919) + querySeed) % 13 + 13) % 13)).ThenBy(id => id).Take(k).ToArray();
        Assert.Equal(reference, exhaustive);
        Assert.Equal(reference, hits.Select(h => h.Id).ToArray());
    }
}
