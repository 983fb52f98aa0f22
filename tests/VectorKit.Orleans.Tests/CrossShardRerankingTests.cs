using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Reranking;

namespace VectorKit.Orleans.Tests;

/// <summary>The re-ranking pipeline and its calibration over merged shard candidates, against one exact index.</summary>
[Collection("cluster")]
public sealed class CrossShardRerankingTests(ClusterFixture fixture)
{
    private const int Dimension = 6;
    private const int Items = 1500;

    // A rental-desk scorer: closeness in the first half of the dimensions plus a preference for the query's own
    // depot (id mod 5); not monotone in the retrieval distance, so the pruning stages lose something to report.
    private sealed class DepotScorer(float[] items, long[] ids) : PairwiseScorer<float[]>
    {
        private readonly Dictionary<long, int> _row = ids.Select((id, i) => (id, i)).ToDictionary(p => p.id, p => p.i);

        public override void WriteRetrievalVector(float[] query, Span<float> destination) => query.CopyTo(destination);

        public override int Score(float[] query, ReadOnlySpan<long> candidateIds, Span<float> scores)
        {
            for (int i = 0; i < candidateIds.Length; i++)
            {
                ReadOnlySpan<float> item = items.AsSpan(_row[candidateIds[i]] * Dimension, Dimension);
                float s = 0;
                for (int j = 0; j < Dimension / 2; j++)
                {
                    s -= (query[j] - item[j]) * (query[j] - item[j]);
                }

                scores[i] = s + (candidateIds[i] % 5 == (long)MathF.Abs(query[0] * 10) % 5 ? 0.3f : 0f);
            }

            return candidateIds.Length;
        }
    }

    [Fact]
    public async Task Pipeline_and_calibration_report_over_shards_equal_those_over_one_exact_index()
    {
        long[] ids = Reference.Ids(Items, 21);
        float[] vectors = Reference.Random(Items, Dimension, 22);
        using ExactIndex single = Reference.Single(ids, vectors, Dimension);
        ShardedVectorCollection sharded = await fixture.Cluster.CreateAsync(new ShardedCollectionDefinition { Name = "rerank", Dimension = Dimension });
        await sharded.UpsertAsync(ids, vectors);
        var scorer = new DepotScorer(vectors, ids);
        var view = sharded.AsIndexView();

        var settings = new RerankingOptions { FinalCount = 5, RetrievalDepth = 60, ExactRescoringDepth = 30, MaxDegreeOfParallelism = 2 };
        float[][] queries = [.. Enumerable.Range(0, 30).Select(q => Reference.Random(1, Dimension, 300 + q))];
        RerankingResults expected = new RerankingPipeline<float[]>(single, scorer, settings).RerankBatch(queries);
        RerankingResults actual = await Task.Run(() => new RerankingPipeline<float[]>(view, scorer, settings).RerankBatch(queries));
        for (int q = 0; q < queries.Length; q++)
        {
            Assert.Equal(expected[q].ToArray(), actual[q].ToArray());
        }

        var calibration = new CalibrationOptions { TargetRecall = 0.9, Confidence = 0.8, MaxUncertainty = 0.2, FinalCount = 5, MaxRetrievalDepth = 200, MaxDegreeOfParallelism = 2 };
        float[][] sample = [.. Enumerable.Range(0, RerankingCalibration.RequiredSampleSize(calibration)).Select(q => Reference.Random(1, Dimension, 900 + q))];
        CalibrationReport one = RerankingCalibration.Calibrate(single, scorer, sample, calibration);
        CalibrationReport across = await Task.Run(() => RerankingCalibration.Calibrate(view, scorer, sample, calibration));
        Assert.Equal(one.Settings.ToJson(), across.Settings.ToJson());
        Assert.Equal(one.Stages.Count, across.Stages.Count);
        for (int s = 0; s < one.Stages.Count; s++)
        {
            Assert.Equal(one.Stages[s].Stage, across.Stages[s].Stage);
            Assert.Equal(one.Stages[s].Depth, across.Stages[s].Depth);
            Assert.Equal(one.Stages[s].Recall, across.Stages[s].Recall);
            Assert.Equal(one.Stages[s].RecallLow, across.Stages[s].RecallLow);
            Assert.Equal(one.Stages[s].ScorerCallsPerQuery, across.Stages[s].ScorerCallsPerQuery);
        }

        Assert.Equal(one.HeldOutRecall, across.HeldOutRecall);
        Assert.Equal(one.RecallLosses, across.RecallLosses);

        // The view's batch search: one scatter–gather per query, the same answers as the single index.
        float[] flat = [.. queries.SelectMany(q => q)];
        BatchSearchResults singleBatch = single.SearchBatch(flat, 7);
        BatchSearchResults viewBatch = await Task.Run(() => view.SearchBatch(flat, 7));
        Assert.Equal(queries.Length, viewBatch.QueryCount);
        for (int q = 0; q < queries.Length; q++)
        {
            Assert.Equal(singleBatch[q].ToArray(), viewBatch[q].ToArray());
        }
        Assert.Equal(Items, one.CollectionSize);
        Assert.Equal(Items, across.CollectionSize);
    }
}
