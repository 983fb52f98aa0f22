using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Graph;
using VectorKit.Reranking;

namespace VectorKit.PublicApi.Tests;

/// <summary>A caller's own query type: a member's short rental history and the distance they will travel.</summary>
public sealed record RentalRequest(float[] TasteVector, int NearestDepot, int MaxDepotHops);

/// <summary>
/// A pairwise scorer written outside the library: a bilinear taste term plus a travel penalty, computed from the
/// caller's own item table. Nothing here needs library internals.
/// </summary>
public sealed class DepotAwareScorer(float[] itemVectors, int[] itemDepots, int dimension) : PairwiseScorer<RentalRequest>
{
    private long _pairs;

    public long PairsScored => Interlocked.Read(ref _pairs);

    public override void WriteRetrievalVector(RentalRequest query, Span<float> destination) => query.TasteVector.CopyTo(destination);

    public override int Score(RentalRequest query, ReadOnlySpan<long> candidateIds, Span<float> scores)
    {
        for (int i = 0; i < candidateIds.Length; i++)
        {
            int row = (int)candidateIds[i];
            ReadOnlySpan<float> item = itemVectors.AsSpan(row * dimension, dimension);

            // Taste: a diagonal bilinear form that weighs the second half of the dimensions three times as much.
            float taste = 0;
            for (int j = 0; j < dimension; j++)
            {
                taste += query.TasteVector[j] * item[j] * (j < dimension / 2 ? 1f : 3f);
            }

            int hops = Math.Abs(itemDepots[row] - query.NearestDepot);
            scores[i] = taste - (hops > query.MaxDepotHops ? 5f : 0.2f * hops);
        }

        Interlocked.Add(ref _pairs, candidateIds.Length);
        return candidateIds.Length;
    }

    public override async ValueTask<int> ScoreAsync(RentalRequest query, ReadOnlyMemory<long> candidateIds, Memory<float> scores, CancellationToken cancellationToken)
    {
        // Stands in for a call to a model server.
        await Task.Yield();
        cancellationToken.ThrowIfCancellationRequested();
        return Score(query, candidateIds.Span, scores.Span);
    }
}

public class CustomScorerTests
{
    private const int Dimension = 12;
    private const int Items = 3000;

    [Fact]
    public async Task ACustomScorer_RunsThroughThePipelineAndTheCalibration()
    {
        var random = new Random(17);
        float[] vectors = Enumerable.Range(0, Items * Dimension).Select(_ => (float)(random.NextDouble() - 0.5)).ToArray();
        int[] depots = Enumerable.Range(0, Items).Select(_ => random.Next(8)).ToArray();
        using var index = new GraphIndex(Dimension, DistanceMetric.InnerProduct, new GraphIndexOptions { MaxDegreeOfParallelism = 1 });
        index.AddRange(Enumerable.Range(0, Items).Select(i => (long)i).ToArray(), vectors);
        var scorer = new DepotAwareScorer(vectors, depots, Dimension);
        var calibration = new CalibrationOptions { TargetRecall = 0.9, FinalCount = 5, MaxUncertainty = 0.08, Seed = 4 };
        RentalRequest[] sample = Enumerable.Range(0, RerankingCalibration.RequiredSampleSize(calibration))
            .Select(_ => new RentalRequest(Enumerable.Range(0, Dimension).Select(_ => (float)(random.NextDouble() - 0.5)).ToArray(), random.Next(8), random.Next(1, 4)))
            .ToArray();

        CalibrationReport report = RerankingCalibration.Calibrate(index, scorer, sample, calibration);
        Assert.True(report.WithinSamplingError, report.ToTable());
        Assert.True(report.ScorerCallReduction > 1, report.ToTable());

        // A service loads the settings and serves with them, synchronously or asynchronously.
        RerankingOptions loaded = RerankingOptions.FromJson(report.Settings.ToJson());
        var pipeline = new RerankingPipeline<RentalRequest>(index, scorer, loaded);
        RerankedHit[] hits = pipeline.Rerank(sample[0]);
        Assert.Equal(5, hits.Length);
        Assert.Equal(hits, await pipeline.RerankAsync(sample[0]));
        RerankingResults batch = await pipeline.RerankBatchAsync(sample);
        Assert.Equal(hits, batch[0].ToArray());
        Assert.All(hits, h => Assert.InRange(h.RetrievalRank, 0, loaded.RetrievalDepth - 1));
    }

    [Fact]
    public void ACustomScorersFailure_IsWrappedWithTheQueryAndStage()
    {
        using var index = new GraphIndex(2, DistanceMetric.SquaredEuclidean);
        index.AddRange([1, 2, 3], [0f, 0f, 1f, 0f, 0f, 1f]);
        var pipeline = new RerankingPipeline<int>(index, new BrokenScorer(), new RerankingOptions { FinalCount = 2, RetrievalDepth = 3 });
        RerankingException e = Assert.Throws<RerankingException>(() => pipeline.RerankBatch([0, 1, 2]));
        Assert.Equal(RerankingStage.PairwiseScoring, e.Stage);
        Assert.Equal(1, e.QueryIndex);
        Assert.IsAssignableFrom<InvalidOperationException>(e);
    }

    private sealed class BrokenScorer : PairwiseScorer<int>
    {
        public override void WriteRetrievalVector(int query, Span<float> destination) => destination.Fill(query);

        public override int Score(int query, ReadOnlySpan<long> candidateIds, Span<float> scores)
        {
            scores.Fill(1f);
            return query == 1 ? candidateIds.Length + 1 : candidateIds.Length;
        }
    }
}
