using System.Globalization;
using VectorKit.Distance;
using VectorKit.Evaluation;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using Xunit;

namespace VectorKit.Tests.Evaluation;

public class SearchQualityTests
{
    private const int D = 16;

    [Fact]
    public void AnExactIndexMeasuresPerfectRecall()
    {
        var random = new Random(21);
        float[] data = BruteForceReference.GaussianVectors(random, 1_000, D);
        float[] queries = BruteForceReference.GaussianVectors(random, 50, D);
        NeighborTable truth = GroundTruth.Compute(data, null, queries, D, 10, DistanceMetric.Cosine);
        using var index = new ExactIndex(D, DistanceMetric.Cosine);

        var options = new QualityMeasurementOptions { K = 10, BuildBatchSize = 300, Search = new SearchOptions { MaxDegreeOfParallelism = 1 } };
        SearchQualityReport report = SearchQuality.Measure(index, null, data, queries, truth, options);

        Assert.Equal(1.0, report.Recall);
        Assert.Equal(10, report.K);
        Assert.Equal(50, report.QueryCount);
        Assert.Equal(1_000, report.VectorCount);
        Assert.Equal(1, report.ThreadCount);
        Assert.Equal(1_000, index.Count);
        Assert.Equal((double)index.MemoryBytes / 1_000, report.BytesPerVector);
        Assert.True(report.BytesPerVector >= D * sizeof(float));
        Assert.True(report.QueriesPerSecond > 0);
        Assert.True(report.BuildTime >= TimeSpan.Zero && report.SearchTime >= TimeSpan.Zero);
    }

    [Fact]
    public void RecallIsMeasuredAgainstTheGivenTruth()
    {
        // The truth is taken over the data set plus extra rows the index never sees, so some true neighbours are missing.
        var random = new Random(22);
        float[] data = BruteForceReference.IntegerVectors(random, 600, D, 3);
        float[] extra = BruteForceReference.IntegerVectors(random, 600, D, 3);
        float[] queries = BruteForceReference.IntegerVectors(random, 40, D, 3);
        NeighborTable truth = GroundTruth.Compute([.. data, .. extra], null, queries, D, 10, DistanceMetric.SquaredEuclidean);
        using var index = new ExactIndex(D, DistanceMetric.SquaredEuclidean);

        SearchQualityReport report = SearchQuality.Measure(index, null, data, queries, truth);

        long[] dataIds = Enumerable.Range(0, 600).Select(i => (long)i).ToArray();
        long[] allIds = Enumerable.Range(0, 1_200).Select(i => (long)i).ToArray();
        double expected = Recall.AtK(
            BruteForceReference.Neighbours([.. data, .. extra], allIds, queries, D, 10, DistanceMetric.SquaredEuclidean),
            BruteForceReference.Neighbours(data, dataIds, queries, D, 10, DistanceMetric.SquaredEuclidean),
            10);
        Assert.Equal(expected, report.Recall, 12);
        Assert.InRange(report.Recall, 0.2, 0.8);
    }

    [Fact]
    public void ProgressCoversBothStages()
    {
        var random = new Random(23);
        float[] data = BruteForceReference.GaussianVectors(random, 500, D);
        float[] queries = BruteForceReference.GaussianVectors(random, 130, D);
        NeighborTable truth = GroundTruth.Compute(data, null, queries, D, 10, DistanceMetric.InnerProduct);
        using var index = new ExactIndex(D, DistanceMetric.InnerProduct);
        var seen = new SynchronousProgress<EvaluationProgress>();

        SearchQuality.Measure(index, null, data, queries, truth, new QualityMeasurementOptions { BuildBatchSize = 200 }, seen);

        EvaluationProgress[] build = seen.Values.Where(p => p.Stage == EvaluationStage.Build).ToArray();
        Assert.Equal(new[] { 0, 200, 400, 500 }, build.Select(p => p.Completed));
        Assert.All(build, p => Assert.Equal(500, p.Total));
        EvaluationProgress[] search = seen.Values.Where(p => p.Stage == EvaluationStage.Search).ToArray();
        Assert.Equal(130, search.Max(p => p.Completed));
        Assert.All(search, p => Assert.Equal(130, p.Total));
    }

    [Fact]
    public void ACancelledTokenStopsBeforeTheBuild()
    {
        float[] data = BruteForceReference.GaussianVectors(new Random(24), 100, D);
        NeighborTable truth = GroundTruth.Compute(data, null, data, D, 10, DistanceMetric.SquaredEuclidean);
        using var index = new ExactIndex(D, DistanceMetric.SquaredEuclidean);
        using var cancelled = new CancellationTokenSource();
        cancelled.Cancel();

        Assert.ThrowsAny<OperationCanceledException>(() => SearchQuality.Measure(index, null, data, data, truth, null, null, cancelled.Token));
        Assert.Equal(0, index.Count);
    }

    [Fact]
    public void ArgumentsAreValidated()
    {
        float[] data = BruteForceReference.GaussianVectors(new Random(25), 20, D);
        NeighborTable truth = GroundTruth.Compute(data, null, data, D, 10, DistanceMetric.SquaredEuclidean);
        using var index = new ExactIndex(D, DistanceMetric.SquaredEuclidean);

        var ids = Assert.Throws<ArgumentException>(() => SearchQuality.Measure(index, [1, 2], data, data, truth));
        Assert.StartsWith("ids has 2 elements; baseVectors holds 20 rows of dimension 16.", ids.Message);

        var baseLength = Assert.Throws<ArgumentException>(() => SearchQuality.Measure(index, null, data.AsSpan(1), data, truth));
        Assert.StartsWith("baseVectors has 319 components, not a multiple of the index dimension 16.", baseLength.Message);

        var queryCount = Assert.Throws<ArgumentException>(() => SearchQuality.Measure(index, null, data, data.AsSpan(0, D * 3), truth));
        Assert.StartsWith("groundTruth has 20 queries; queries holds 3.", queryCount.Message);

        var narrow = Assert.Throws<ArgumentException>(() => SearchQuality.Measure(index, null, data, data, truth, new QualityMeasurementOptions { K = 12 }));
        Assert.StartsWith("groundTruth holds 10 neighbours per query; recall@12 over 20 vectors needs 12.", narrow.Message);

        var noQueries = Assert.Throws<ArgumentException>(() => SearchQuality.Measure(index, null, data, [], NeighborTable.FromRows([])));
        Assert.StartsWith("queries is empty;", noQueries.Message);

        index.Add(99, data.AsSpan(0, D));
        var notEmpty = Assert.Throws<ArgumentException>(() => SearchQuality.Measure(index, null, data, data, truth));
        Assert.StartsWith("index already holds 1 vectors; it must be empty so the build can be timed.", notEmpty.Message);

        Assert.Throws<ArgumentNullException>(() => SearchQuality.Measure(null!, null, data, data, truth));
        Assert.Throws<ArgumentNullException>(() => SearchQuality.Measure(index, null, data, data, null!));
    }

    [Theory]
    [InlineData(0)]
    [InlineData(-1)]
    public void OptionsRejectNonPositiveValues(int value)
    {
        var k = Assert.Throws<ArgumentOutOfRangeException>(() => new QualityMeasurementOptions { K = value });
        Assert.StartsWith($"K must be positive; got {value}.", k.Message);
        var batch = Assert.Throws<ArgumentOutOfRangeException>(() => new QualityMeasurementOptions { BuildBatchSize = value });
        Assert.StartsWith($"BuildBatchSize must be positive; got {value}.", batch.Message);
    }

    [Fact]
    public void TheReportLineIsCultureInvariant()
    {
        var report = new SearchQualityReport(0.98765, 41_250.4, TimeSpan.FromMilliseconds(850), TimeSpan.FromMilliseconds(24), 540.2, 10, 1_000, 20_000, 2);
        CultureInfo saved = CultureInfo.CurrentCulture;
        try
        {
            CultureInfo.CurrentCulture = CultureInfo.GetCultureInfo("de-DE");
            Assert.Equal(",", CultureInfo.CurrentCulture.NumberFormat.NumberDecimalSeparator);
            Assert.Equal(
                "recall@10 0.9877 | 41,250 queries/s (1,000 queries, 2 threads) | build 0.85 s (20,000 vectors) | 540.2 bytes/vector",
                report.ToString());
        }
        finally
        {
            CultureInfo.CurrentCulture = saved;
        }
    }
}
