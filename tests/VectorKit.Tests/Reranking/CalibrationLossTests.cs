using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Indexes.Graph;
using VectorKit.Reranking;
using VectorKit.Tests.TestData;

namespace VectorKit.Tests.Reranking;

/// <summary>
/// The calibration report's split of the lost recall by cause. Each test builds a case where one cause is zero by
/// construction (an exact index cannot miss at its search; a scorer equal to the metric cannot disagree with it past
/// the depth) and checks that the losses add up to what the pipeline missed.
/// </summary>
public class CalibrationLossTests
{
    private const int K = 10;

    [Fact]
    public void ExactIndex_LosesNothingAtItsSearch_AndTheLossesAddUp()
    {
        var world = new LineWorld(4000, 20, seed: 71);
        using var index = world.BuildIndex();
        var options = new CalibrationOptions { TargetRecall = 0.9, FinalCount = K, MaxUncertainty = 0.1, ExactRescoringOverfetch = 3 };
        double[] sample = world.Queries(RerankingCalibration.RequiredSampleSize(options), seed: 72);

        CalibrationReport report = RerankingCalibration.Calibrate(index, new LineWorld.Scorer(world.Count), sample, options);

        Assert.Equal([RecallLossCause.IndexSearch, RecallLossCause.RetrievalDepth, RecallLossCause.ExactRescoring, RecallLossCause.PairwiseScoring], report.RecallLosses.Select(l => l.Cause));
        Assert.Equal(0, Loss(report, RecallLossCause.IndexSearch));
        Assert.Equal(0, Loss(report, RecallLossCause.PairwiseScoring));
        AssertLossesAddUp(report);

        // The line world's scorer ignores the noise the vectors carry, so what retrieval misses is below the depth.
        Assert.Equal(1 - report.Stages[0].Recall, Loss(report, RecallLossCause.RetrievalDepth), 9);
        Assert.Null(report.IndexDefaults);
        Assert.Contains("retrieval depth", report.ToTable());
    }

    [Fact]
    public void NarrowGraphSearch_LosesAtTheIndexSearch_NotAtTheDepth()
    {
        const int Dimension = 12;
        const int Count = 3000;
        float[] items = Gaussian(Count, Dimension, seed: 81);
        using var graph = new GraphIndex(Dimension, DistanceMetric.SquaredEuclidean, new GraphIndexOptions { LinksPerNode = 4, BuildWidth = 16, Seed = 3, MaxDegreeOfParallelism = 1 });
        graph.AddRange(Enumerable.Range(0, Count).Select(i => (long)i).ToArray(), items);
        var options = new CalibrationOptions { TargetRecall = 0.8, FinalCount = K, MaxUncertainty = 0.1, Selection = CalibrationSelection.PointEstimate, SearchWidths = [10], MaxRetrievalDepth = 10, MaxDegreeOfParallelism = 1 };
        VectorQuery[] sample = Queries(RerankingCalibration.RequiredSampleSize(options), Dimension, seed: 82);

        CalibrationReport report = RerankingCalibration.Calibrate(graph, new SimilarityScorer(items, Dimension), sample, options);

        // Retrieval depth k with a narrow walk on a sparse graph: the search misses some of the true top k.
        Assert.True(report.HeldOutRecall < 1, report.ToTable());
        Assert.Equal([RecallLossCause.IndexSearch, RecallLossCause.RetrievalDepth, RecallLossCause.PairwiseScoring], report.RecallLosses.Select(l => l.Cause));

        // The scorer is the metric (in double precision), so an exact scan to depth k finds its top k: every miss is the search's.
        Assert.Equal(0, Loss(report, RecallLossCause.RetrievalDepth));
        Assert.Equal(1 - report.HeldOutRecall, Loss(report, RecallLossCause.IndexSearch), 9);
        RecallLoss search = report.RecallLosses[0];
        Assert.InRange(search.Lost, search.LostLow, search.LostHigh);
        AssertLossesAddUp(report);
    }

    [Fact]
    public void CodesWithoutFullVectors_ReportRetrievalAsOneCause_UnlessFullVectorsAreGiven()
    {
        const int Dimension = 8;
        const int Count = 2000;
        float[] items = Gaussian(Count, Dimension, seed: 91);
        using var index = new ExactIndex(Dimension, DistanceMetric.SquaredEuclidean, new ExactIndexOptions { Encoding = VectorEncoding.Scalar8Bit, RescoreDepth = 0 });
        index.Train(items);
        index.AddRange(Enumerable.Range(0, Count).Select(i => (long)i).ToArray(), items);
        var scorer = new SimilarityScorer(items, Dimension);
        var options = new CalibrationOptions { TargetRecall = 0.9, FinalCount = K, MaxUncertainty = 0.1 };
        VectorQuery[] sample = Queries(RerankingCalibration.RequiredSampleSize(options), Dimension, seed: 92);

        CalibrationReport codesOnly = RerankingCalibration.Calibrate(index, scorer, sample, options);
        Assert.Equal([RecallLossCause.Retrieval, RecallLossCause.PairwiseScoring], codesOnly.RecallLosses.Select(l => l.Cause));
        Assert.Equal(1 - codesOnly.Stages[0].Recall, Loss(codesOnly, RecallLossCause.Retrieval), 9);
        AssertLossesAddUp(codesOnly);

        CalibrationReport split = RerankingCalibration.Calibrate(index, scorer, sample, new CalibrationOptions { TargetRecall = 0.9, FinalCount = K, MaxUncertainty = 0.1, FullVectors = new FullVectorSources.RowSource(items, Dimension) });
        Assert.Equal([RecallLossCause.IndexSearch, RecallLossCause.RetrievalDepth, RecallLossCause.PairwiseScoring], split.RecallLosses.Select(l => l.Cause));
        Assert.Equal(0, Loss(split, RecallLossCause.RetrievalDepth));
        AssertLossesAddUp(split);
    }

    [Fact]
    public void TunedIndex_ReportsTheDefaultsItSearchedWith()
    {
        var world = new LineWorld(2000, 10, seed: 101);
        float[] vectors = world.Vectors;
        using var graph = new GraphIndex(2, DistanceMetric.SquaredEuclidean, new GraphIndexOptions { Seed = 5, MaxDegreeOfParallelism = 1 });
        graph.AddRange(Enumerable.Range(0, world.Count).Select(i => (long)i).ToArray(), vectors);
        var tuned = new TunedSearchDefaults(48, null, 0.95, K);
        graph.ApplyTunedDefaults(tuned);
        var options = new CalibrationOptions { TargetRecall = 0.9, FinalCount = K, MaxUncertainty = 0.1, MaxDegreeOfParallelism = 1 };

        CalibrationReport report = RerankingCalibration.Calibrate(graph, new LineWorld.Scorer(world.Count), world.Queries(RerankingCalibration.RequiredSampleSize(options), seed: 102), options);

        Assert.Same(tuned, report.IndexDefaults);
        Assert.Contains("tuned defaults: search width 48", report.ToTable());
        Assert.Contains("\"RecallLosses\"", report.ToJson());
        AssertLossesAddUp(report);
    }

    [Theory]
    [InlineData(10, 2, 4096, new[] { 10, 15, 20 })]
    [InlineData(10, 1, 4096, new[] { 10 })]
    [InlineData(100, 8, 300, new[] { 100, 150, 225, 300 })]
    [InlineData(1, 3, 4096, new[] { 1, 2, 3 })]
    [InlineData(500, 4, 400, new[] { 400 })]
    public void JointDepths_RunFromTheSmallestToTheOverfetchLimit(int depth, int overfetch, int maxDepth, int[] expected)
        => Assert.Equal(expected, RerankingCalibration.JointDepths(depth, overfetch, maxDepth));

    private static double Loss(CalibrationReport report, RecallLossCause cause) => report.RecallLosses.Single(l => l.Cause == cause).Lost;

    private static void AssertLossesAddUp(CalibrationReport report)
        => Assert.Equal(1 - report.HeldOutRecall, report.RecallLosses.Sum(l => l.Lost), 9);

    private static float[] Gaussian(int count, int dimension, int seed)
    {
        var random = new Random(seed);
        float[] data = new float[count * dimension];
        for (int i = 0; i < data.Length; i++)
        {
            data[i] = (float)(Math.Sqrt(-2 * Math.Log(1 - random.NextDouble())) * Math.Cos(2 * Math.PI * random.NextDouble()));
        }

        return data;
    }

    private static VectorQuery[] Queries(int n, int dimension, int seed)
    {
        float[] vectors = Gaussian(n, dimension, seed);
        return Enumerable.Range(0, n).Select(q => new VectorQuery(vectors.AsSpan(q * dimension, dimension).ToArray(), q)).ToArray();
    }
}
