using VectorKit.Distance;
using VectorKit.Evaluation;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Indexes.Graph;
using VectorKit.Reranking;
using VectorKit.Tests.TestData;

namespace VectorKit.Tests.Reranking;

public class RerankingPipelineTests
{
    private const int Dimension = 16;

    [Fact]
    public void ScorerEqualToRetrievalSimilarity_PipelineRecallEqualsTheIndexsOwnRecall()
    {
        // A narrow graph search over clustered data misses some true neighbours; a scorer that is the retrieval
        // similarity itself can only re-order what retrieval found, so the pipeline's recall of the scorer's
        // exhaustive top k equals the index's recall@k against exact search, query by query.
        const int n = 4000, k = 10, queryCount = 200;
        float[] items = ClusteredData.Generate(n, Dimension, clusters: 40, spread: 0.3f, seed: 3);
        float[] queryData = ClusteredData.Generate(queryCount, Dimension, clusters: 40, spread: 0.3f, seed: 4);
        long[] ids = Enumerable.Range(0, n).Select(i => (long)i).ToArray();
        using var graph = new GraphIndex(Dimension, DistanceMetric.SquaredEuclidean, new GraphIndexOptions { LinksPerNode = 4, BuildWidth = 16, Seed = 1, MaxDegreeOfParallelism = 1 });
        graph.AddRange(ids, items);
        using var exact = new ExactIndex(Dimension, DistanceMetric.SquaredEuclidean);
        exact.AddRange(ids, items);
        var queries = Enumerable.Range(0, queryCount).Select(q => new VectorQuery(queryData.AsSpan(q * Dimension, Dimension).ToArray(), q)).ToArray();
        var scorer = new SimilarityScorer(items, Dimension);

        var search = new SearchOptions { SearchWidth = k };
        BatchSearchResults graphResults = graph.SearchBatch(queryData, k, search);
        double indexRecall = Recall.AtK(GroundTruth.Compute(exact, queryData, k), graphResults, k);
        // One build thread: the same graph, and so the same recall, on every run. Approximate, so the comparison means something.
        Assert.InRange(indexRecall, 0.1, 0.995);

        var pipeline = new RerankingPipeline<VectorQuery>(graph, scorer, new RerankingOptions { FinalCount = k, RetrievalDepth = k, SearchWidth = k });
        RerankingResults results = pipeline.RerankBatch(queries);
        long[][] truth = RerankingCalibration.ScoreEverything(scorer, queries, ids, k);
        long[][] found = Enumerable.Range(0, queryCount).Select(q => results[q].ToArray().Select(h => h.Id).ToArray()).ToArray();
        Assert.Equal(indexRecall, Recall.AtK(truth, found, k), 12);
        for (int q = 0; q < queryCount; q++)
        {
            Assert.Equal(graphResults[q].ToArray().Select(h => h.Id), found[q]);
        }

        Assert.Equal((long)queryCount * k, results.PairsScored);
    }

    [Fact]
    public void Hits_CarryTheRetrievalDistanceAndRankAndTheScore()
    {
        float[] items = ClusteredData.Generate(500, Dimension, 5, 0.5f, seed: 7);
        using var index = new ExactIndex(Dimension, DistanceMetric.SquaredEuclidean);
        index.AddRange(Enumerable.Range(0, 500).Select(i => (long)i).ToArray(), items);
        var query = new VectorQuery(items.AsSpan(0, Dimension).ToArray(), 1);
        var pipeline = new RerankingPipeline<VectorQuery>(index, new HashScorer(Dimension), new RerankingOptions { FinalCount = 5, RetrievalDepth = 50 });
        RerankedHit[] hits = pipeline.Rerank(query);
        SearchHit[] retrieved = index.Search(query.Vector, 50);
        Assert.Equal(5, hits.Length);
        for (int i = 0; i < hits.Length; i++)
        {
            Assert.Equal(retrieved[hits[i].RetrievalRank].Id, hits[i].Id);
            Assert.Equal(retrieved[hits[i].RetrievalRank].Distance, hits[i].RetrievalDistance);
            Assert.True(float.IsNaN(hits[i].ExactDistance));
            Assert.Equal((float)(((hits[i].Id * 7919) + 1) % 13), hits[i].Score);
            if (i > 0)
            {
                Assert.True(hits[i - 1].Score > hits[i].Score || (hits[i - 1].Score == hits[i].Score && hits[i - 1].Id < hits[i].Id));
            }
        }
    }

    [Fact]
    public void ExactStage_ReScoresOnTheSuppliedFullVectors()
    {
        // The index holds coarse copies (rounded to one decimal); the full-vector source holds the originals.
        const int n = 800;
        float[] items = ClusteredData.Generate(n, Dimension, 8, 0.4f, seed: 9);
        float[] coarse = items.Select(x => MathF.Round(x, 1)).ToArray();
        long[] ids = Enumerable.Range(0, n).Select(i => (long)i).ToArray();
        using var index = new ExactIndex(Dimension, DistanceMetric.SquaredEuclidean);
        index.AddRange(ids, coarse);
        var source = new ArraySource(items, Dimension);
        var query = new VectorQuery(ClusteredData.Generate(1, Dimension, 8, 0.4f, seed: 10), 0);
        var pipeline = new RerankingPipeline<VectorQuery>(index, new SimilarityScorer(items, Dimension), new RerankingOptions { FinalCount = 5, RetrievalDepth = 100, ExactRescoringDepth = 20 }, source);
        RerankedHit[] hits = pipeline.Rerank(query);
        SearchHit[] truth = ExactSearch(items, query.Vector, 5);
        Assert.Equal(truth.Select(h => h.Id), hits.Select(h => h.Id));
        foreach (RerankedHit hit in hits)
        {
            Assert.Equal(VectorDistance.SquaredEuclidean(query.Vector, items.AsSpan((int)hit.Id * Dimension, Dimension)), hit.ExactDistance);
        }
    }

    [Fact]
    public async Task AsyncForms_GiveTheSameResultsAsTheSyncForms()
    {
        float[] items = ClusteredData.Generate(600, Dimension, 6, 0.5f, seed: 12);
        using var index = new ExactIndex(Dimension, DistanceMetric.Cosine);
        index.AddRange(Enumerable.Range(0, 600).Select(i => (long)i).ToArray(), items);
        var queries = Enumerable.Range(0, 20).Select(q => new VectorQuery(items.AsSpan(q * Dimension, Dimension).ToArray(), q)).ToArray();
        var pipeline = new RerankingPipeline<VectorQuery>(index, new FaultyScorer(Dimension, -1, "none"), new RerankingOptions { FinalCount = 7, RetrievalDepth = 40, ScoringBatchSize = 9 });
        RerankingResults sync = pipeline.RerankBatch(queries);
        RerankingResults async = await pipeline.RerankBatchAsync(queries);
        for (int q = 0; q < queries.Length; q++)
        {
            Assert.Equal(sync[q].ToArray(), async[q].ToArray());
            Assert.Equal(sync[q].ToArray(), await pipeline.RerankAsync(queries[q]));
            Assert.Equal(sync[q].ToArray(), pipeline.Rerank(queries[q]));
        }
    }

    [Fact]
    public async Task Cancellation_StopsABatch()
    {
        float[] items = ClusteredData.Generate(300, Dimension, 3, 0.5f, seed: 13);
        using var index = new ExactIndex(Dimension, DistanceMetric.SquaredEuclidean);
        index.AddRange(Enumerable.Range(0, 300).Select(i => (long)i).ToArray(), items);
        var queries = Enumerable.Range(0, 50).Select(q => new VectorQuery(items.AsSpan(q * Dimension, Dimension).ToArray(), q)).ToArray();
        var pipeline = new RerankingPipeline<VectorQuery>(index, new FaultyScorer(Dimension, -1, "none"));
        using var cancelled = new CancellationTokenSource();
        cancelled.Cancel();
        Assert.ThrowsAny<OperationCanceledException>(() => pipeline.RerankBatch(queries, cancellationToken: cancelled.Token));
        await Assert.ThrowsAnyAsync<OperationCanceledException>(() => pipeline.RerankBatchAsync(queries, cancellationToken: cancelled.Token));
        await Assert.ThrowsAnyAsync<OperationCanceledException>(async () => await pipeline.RerankAsync(queries[0], cancelled.Token));
    }

    private static SearchHit[] ExactSearch(float[] items, float[] query, int k)
    {
        // Double-precision reference, independent of the library's kernels.
        int n = items.Length / Dimension;
        return Enumerable.Range(0, n)
            .Select(i =>
            {
                double sum = 0;
                for (int j = 0; j < Dimension; j++)
                {
                    double d = query[j] - (double)items[(i * Dimension) + j];
                    sum += d * d;
                }

                return new SearchHit(i, (float)sum);
            })
            .OrderBy(h => h.Distance).ThenBy(h => h.Id).Take(k).ToArray();
    }

    private sealed class ArraySource(float[] items, int dimension) : IFullVectorSource
    {
        public int Dimension => dimension;

        public bool TryGetVector(long id, Span<float> destination)
        {
            items.AsSpan((int)id * dimension, dimension).CopyTo(destination);
            return true;
        }
    }
}
