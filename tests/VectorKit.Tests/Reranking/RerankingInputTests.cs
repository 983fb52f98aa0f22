using VectorKit.Distance;
using VectorKit.Indexes.Exact;
using VectorKit.Reranking;
using VectorKit.Tests.TestData;

namespace VectorKit.Tests.Reranking;

/// <summary>Bad input: a misbehaving scorer, inconsistent depths, an impossible target, a sample too small.</summary>
public class RerankingInputTests
{
    private const int Dimension = 8;

    [Theory]
    [Trait("CWE", "CWE-20")]
    [InlineData("nan", "NaN")]
    [InlineData("infinity", "Infinity")]
    [InlineData("count", "reported")]
    [InlineData("throw", "model unavailable")]
    public async Task AMisbehavingScorer_IsReportedWithTheQueryAndTheStage(string fault, string expected)
    {
        (ExactIndex index, VectorQuery[] queries) = World();
        using (index)
        {
            var pipeline = new RerankingPipeline<VectorQuery>(index, new FaultyScorer(Dimension, faultySeed: 13, fault), new RerankingOptions { FinalCount = 5, RetrievalDepth = 20 });
            var batch = Assert.Throws<RerankingException>(() => pipeline.RerankBatch(queries));
            Assert.Equal(13, batch.QueryIndex);
            Assert.Equal(RerankingStage.PairwiseScoring, batch.Stage);
            Assert.StartsWith("Query 13, stage PairwiseScoring: ", batch.Message);
            Assert.Contains(expected, batch.Message + batch.InnerException?.Message);
            if (fault == "throw")
            {
                Assert.IsType<InvalidOperationException>(batch.InnerException);
            }

            var asyncBatch = await Assert.ThrowsAsync<RerankingException>(() => pipeline.RerankBatchAsync(queries));
            Assert.Equal(13, asyncBatch.QueryIndex);
            Assert.Equal(RerankingStage.PairwiseScoring, asyncBatch.Stage);

            var single = Assert.Throws<RerankingException>(() => pipeline.Rerank(queries[13]));
            Assert.Equal(0, single.QueryIndex);

            // Calibration meets the same scorer in its exhaustive pass, and says so.
            var calibration = Assert.Throws<RerankingException>(() => RerankingCalibration.Calibrate(index, new FaultyScorer(Dimension, 13, fault), queries, new CalibrationOptions { FinalCount = 5, MaxUncertainty = 0.5, Selection = CalibrationSelection.PointEstimate }));
            Assert.Equal(13, calibration.QueryIndex);
            Assert.Equal(RerankingStage.ExhaustiveScoring, calibration.Stage);
        }
    }

    [Fact]
    [Trait("CWE", "CWE-20")]
    public void ANonFiniteRetrievalVector_IsReportedAsARetrievalFailure()
    {
        (ExactIndex index, VectorQuery[] queries) = World();
        using (index)
        {
            var pipeline = new RerankingPipeline<VectorQuery>(index, new FaultyScorer(Dimension, 4, "vector"));
            var e = Assert.Throws<RerankingException>(() => pipeline.RerankBatch(queries));
            Assert.Equal(4, e.QueryIndex);
            Assert.Equal(RerankingStage.Retrieval, e.Stage);
            Assert.IsType<ArgumentException>(e.InnerException);
        }
    }

    [Fact]
    [Trait("CWE", "CWE-20")]
    public void DepthBelowK_IsRejected()
    {
        (ExactIndex index, _) = World();
        using (index)
        {
            var scorer = new HashScorer(Dimension);
            var e = Assert.Throws<ArgumentException>(() => new RerankingPipeline<VectorQuery>(index, scorer, new RerankingOptions { FinalCount = 10, RetrievalDepth = 5 }));
            Assert.Contains("RetrievalDepth (5) is less than FinalCount (10)", e.Message);
            e = Assert.Throws<ArgumentException>(() => new RerankingPipeline<VectorQuery>(index, scorer, new RerankingOptions { FinalCount = 10, RetrievalDepth = 50, ExactRescoringDepth = 8 }));
            Assert.Contains("ExactRescoringDepth (8) is less than FinalCount (10)", e.Message);
            e = Assert.Throws<ArgumentException>(() => new RerankingPipeline<VectorQuery>(index, scorer, new RerankingOptions { FinalCount = 10, RetrievalDepth = 50, ExactRescoringDepth = 60 }));
            Assert.Contains("ExactRescoringDepth (60) is more than RetrievalDepth (50)", e.Message);
            e = Assert.Throws<ArgumentException>(() => RerankingCalibration.Calibrate(index, scorer, new VectorQuery[400], new CalibrationOptions { FinalCount = 10, MaxRetrievalDepth = 5 }));
            Assert.Contains("MaxRetrievalDepth (5) is less than FinalCount (10)", e.Message);
            e = Assert.Throws<ArgumentException>(() => RerankingOptions.FromJson("{\"FinalCount\": 10, \"RetrievalDepth\": 4}"));
            Assert.Contains("RetrievalDepth (4) is less than FinalCount (10)", e.Message);
        }

        Assert.Throws<ArgumentOutOfRangeException>(() => new RerankingOptions { RetrievalDepth = 0 });
        Assert.Throws<ArgumentOutOfRangeException>(() => new RerankingOptions { FinalCount = -1 });
        Assert.Throws<ArgumentOutOfRangeException>(() => new RerankingOptions { ExactRescoringDepth = 0 });
        Assert.Throws<ArgumentOutOfRangeException>(() => new RerankingOptions { SearchWidth = 0 });
        Assert.Throws<ArgumentOutOfRangeException>(() => new RerankingOptions { MaxDegreeOfParallelism = 0 });
        Assert.Throws<ArgumentException>(() => RerankingOptions.FromJson("{\"RetrievalDepth\": -3}"));
        Assert.Throws<ArgumentException>(() => RerankingOptions.FromJson("not json"));
        Assert.Throws<ArgumentException>(() => RerankingOptions.FromJson("null"));
        Assert.Contains("RetrievalDeep", Assert.Throws<ArgumentException>(() => RerankingOptions.FromJson("{\"RetrievalDeep\": 40}")).Message);

        // Missing properties take their defaults; present ones are kept.
        RerankingOptions partial = RerankingOptions.FromJson("{\"RetrievalDepth\": 40}");
        Assert.Equal(40, partial.RetrievalDepth);
        Assert.Equal(RerankingOptions.Default.FinalCount, partial.FinalCount);
        Assert.Null(partial.ExactRescoringDepth);
    }

    [Theory]
    [Trait("CWE", "CWE-20")]
    [InlineData(0.0)]
    [InlineData(-0.5)]
    [InlineData(1.0000001)]
    [InlineData(double.NaN)]
    [InlineData(double.PositiveInfinity)]
    public void TargetRecallOutsideZeroToOne_IsRejected(double target)
    {
        var e = Assert.Throws<ArgumentOutOfRangeException>(() => new CalibrationOptions { TargetRecall = target });
        Assert.Equal("TargetRecall", e.ParamName);
        Assert.Contains("(0, 1]", e.Message);
    }

    [Fact]
    public void TargetRecallOfOne_IsAccepted() => Assert.Equal(1.0, new CalibrationOptions { TargetRecall = 1.0 }.TargetRecall);

    [Fact]
    [Trait("CWE", "CWE-20")]
    public void ASampleTooSmall_IsRejectedWithTheNumberOfQueriesNeeded()
    {
        (ExactIndex index, VectorQuery[] queries) = World();
        using (index)
        {
            var options = new CalibrationOptions { TargetRecall = 0.95, Confidence = 0.95, MaxUncertainty = 0.02 };
            int needed = RerankingCalibration.RequiredSampleSize(options);
            Assert.True(needed > queries.Length);
            var e = Assert.Throws<ArgumentException>(() => RerankingCalibration.Calibrate(index, new HashScorer(Dimension), queries, options));
            Assert.Equal("sampleQueries", e.ParamName);
            Assert.Contains($"a sample of at least {needed} queries", e.Message);
            Assert.Contains($"{queries.Length} queries", e.Message);

            // Under the default lower-bound rule the tuning half must be able to show 0.95 at all: 73 queries that all
            // find everything give a Wilson lower bound of 73 / (73 + 1.96²) = 0.9500.
            var rule = Assert.Throws<ArgumentException>(() => RerankingCalibration.Calibrate(index, new HashScorer(Dimension), queries, new CalibrationOptions { TargetRecall = 0.95, MaxUncertainty = 0.5 }));
            Assert.Contains("73 tuning queries", rule.Message);
            Assert.Equal(146, RerankingCalibration.RequiredSampleSize(new CalibrationOptions { TargetRecall = 0.95, MaxUncertainty = 0.5 }));

            // The number it names is enough: that many queries pass the check (and calibrate).
            VectorQuery[] enough = Enumerable.Range(0, needed).Select(i => queries[i % queries.Length] with { Seed = i }).ToArray();
            CalibrationReport report = RerankingCalibration.Calibrate(index, new HashScorer(Dimension), enough, options);
            Assert.True(report.HeldOutQueryCount + report.TuningQueryCount == needed);
        }
    }

    private static (ExactIndex Index, VectorQuery[] Queries) World()
    {
        float[] items = ClusteredData.Generate(400, Dimension, 4, 0.5f, seed: 2);
        var index = new ExactIndex(Dimension, DistanceMetric.SquaredEuclidean);
        index.AddRange(Enumerable.Range(0, 400).Select(i => (long)i).ToArray(), items);
        var queries = Enumerable.Range(0, 40).Select(q => new VectorQuery(items.AsSpan(q * Dimension, Dimension).ToArray(), q)).ToArray();
        return (index, queries);
    }
}
