using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Indexes.Graph;
using VectorKit.Indexes.InvertedFile;
using VectorKit.Tests.Evaluation;
using VectorKit.Tests.TestData;
using VectorKit.Tuning;
using Xunit.Abstractions;

namespace VectorKit.Tests.Tuning;

public class RecallTuningTests(ITestOutputHelper output)
{
    private const int Dimension = 16;
    private const int Items = 4000;
    private const int Clusters = 40;
    private const float Spread = 0.8f;

    public static TheoryData<string> Variants => new() { "graph", "graph-8bit", "ivf", "ivf-8bit", "ivf-product", "exact-8bit", "exact" };

    [Theory]
    [MemberData(nameof(Variants))]
    public void TunedDefaults_MeetTheTarget_OnQueriesTheTuningNeverSaw(string variant)
    {
        float[] data = ClusteredData.Generate(Items, Dimension, Clusters, Spread, 21);
        long[] ids = Enumerable.Range(0, Items).Select(i => 10L * i).ToArray();
        using VectorIndex index = Build(variant, data, ids);
        float[] tuning = ClusteredData.Generate(400, Dimension, Clusters, Spread, 22);
        float[] unseen = ClusteredData.Generate(400, Dimension, Clusters, Spread, 23);

        TuningReport report = RecallTuning.Tune(index, tuning, new RecallTuningOptions { TargetRecall = 0.9, K = 10 });
        output.WriteLine(report.ToString());
        Assert.True(report.TargetMet);
        Assert.True(report.Applied);
        Assert.Equal((300, 100, false), (report.TuningQueries, report.HeldOutQueries, report.QueriesDrawn));
        Assert.Equal(report.Chosen.SearchWidth, index.TunedDefaults!.SearchWidth);
        Assert.Equal(report.Chosen.RescoreDepth, index.TunedDefaults.RescoreDepth);
        Assert.Contains(report.Chosen, report.Curve);
        Assert.True(report.Chosen.RecallLow >= 0.9);

        // The defaults, measured against a double-precision loop on queries from the same distribution, meet the target.
        long[][] truth = BruteForceReference.Neighbours(data, ids, unseen, Dimension, 10, DistanceMetric.SquaredEuclidean);
        double recall = Recall(index, unseen, truth, null);
        output.WriteLine($"unseen queries at the tuned defaults: {recall:0.0000}");
        Assert.True(recall >= 0.9, $"recall {recall:0.0000} on unseen queries at the tuned defaults");

        // The chosen width is the narrowest that met the target at its depth: one step narrower (when measured) did not.
        if (report.Chosen.SearchWidth is > 1 and { } width)
        {
            TuningPoint? narrower = report.Curve.Where(p => p.RescoreDepth == report.Chosen.RescoreDepth && p.SearchWidth < width).MaxBy(p => p.SearchWidth);
            Assert.True(narrower is null || narrower.RecallLow < 0.9);
        }
    }

    [Fact]
    public void AnExactIndex_HasNothingToTune_AndMeasuresRecallOne()
    {
        float[] data = ClusteredData.Generate(500, Dimension, 5, Spread, 1);
        using var exact = new ExactIndex(Dimension, DistanceMetric.Cosine);
        exact.AddRange(Enumerable.Range(0, 500).Select(i => (long)i).ToArray(), data);
        TuningReport report = RecallTuning.Tune(exact, new RecallTuningOptions { DrawnQueries = 100 });
        Assert.Equal((null, null, 1.0), (report.Chosen.SearchWidth, report.Chosen.RescoreDepth, report.Chosen.Recall));
        Assert.Equal(1, report.Chosen.RecallHigh, 1e-12);
        Assert.Single(report.Curve);
        Assert.Equal(1, report.HeldOut.Recall);
        Assert.True(report.QueriesDrawn);
    }

    [Fact]
    public void ASpentBudget_ChoosesAmongTheSettingsMeasured_AndSaysSo()
    {
        float[] data = ClusteredData.Generate(Items, Dimension, Clusters, Spread, 21);
        using VectorIndex index = Build("graph", data, Enumerable.Range(0, Items).Select(i => (long)i).ToArray());
        TuningReport report = RecallTuning.Tune(index, new RecallTuningOptions { DrawnQueries = 100, TimeBudget = TimeSpan.FromTicks(1), TargetRecall = 1 });
        Assert.False(report.Completed);
        Assert.Single(report.Curve);
        Assert.Same(report.Curve[0], report.Chosen);
    }

    [Fact]
    public void Cancellation_StopsTheTuning_AndLeavesTheDefaults()
    {
        float[] data = ClusteredData.Generate(Items, Dimension, Clusters, Spread, 21);
        using VectorIndex index = Build("graph", data, Enumerable.Range(0, Items).Select(i => (long)i).ToArray());
        using var source = new CancellationTokenSource();
        var progress = new CancelAt(source, 2);
        Assert.ThrowsAny<OperationCanceledException>(() => RecallTuning.Tune(index, new RecallTuningOptions { DrawnQueries = 100, TargetRecall = 1 }, progress, source.Token));
        Assert.Null(index.TunedDefaults);
    }

    [Fact]
    public void TooFewItemsOrBadQueries_AreRejected()
    {
        using var exact = new ExactIndex(2, DistanceMetric.SquaredEuclidean);
        exact.AddRange([1, 2], [0, 0, 1, 1]);
        var e = Assert.Throws<ArgumentException>(() => RecallTuning.Tune(exact));
        Assert.Contains("The index holds 2 items; tuning recall@10 needs at least 10", e.Message);
        e = Assert.Throws<ArgumentException>(() => RecallTuning.Tune(exact, new float[] { 1, 2, 3 }, new RecallTuningOptions { K = 1 }));
        Assert.Contains("expected a multiple of the dimension 2, at least 2 queries", e.Message);
    }

    [Fact]
    public void Check_MeasuresTheDefaults_AndFallsShortWhenTheyNoLongerServe()
    {
        float[] data = ClusteredData.Generate(Items, Dimension, Clusters, Spread, 21);
        using VectorIndex index = Build("ivf", data, Enumerable.Range(0, Items).Select(i => (long)i).ToArray());
        index.ApplyTunedDefaults(new TunedSearchDefaults(64, null, 0.9, 10));
        RecallCheck all = RecallTuning.Check(index);
        Assert.Equal((1.0, 200, 0.9, 10), (all.Recall, all.Queries, all.TargetRecall, all.K)); // every list probed: exact
        Assert.False(all.FallsShort);
        index.ApplyTunedDefaults(new TunedSearchDefaults(1, null, 0.999, 10));
        Assert.True(RecallTuning.Check(index).FallsShort);
    }

    // Cancels from inside the tuning, on the reporting thread, once the given number of settings was measured.
    private sealed class CancelAt(CancellationTokenSource source, int completed) : IProgress<TuningProgress>
    {
        public void Report(TuningProgress value)
        {
            if (value.Completed == completed)
            {
                source.Cancel();
            }
        }
    }

    internal static VectorIndex Build(string variant, float[] data, long[] ids)
    {
        VectorIndex index = variant switch
        {
            "graph" => new GraphIndex(Dimension, DistanceMetric.SquaredEuclidean, new GraphIndexOptions { LinksPerNode = 6, BuildWidth = 40, Seed = 4, MaxDegreeOfParallelism = 1 }),
            "graph-8bit" => new GraphIndex(Dimension, DistanceMetric.SquaredEuclidean, new GraphIndexOptions { LinksPerNode = 6, BuildWidth = 40, Seed = 4, MaxDegreeOfParallelism = 1, Encoding = VectorEncoding.Scalar8Bit, RescoreDepth = 10 }),
            "ivf" => new InvertedFileIndex(Dimension, DistanceMetric.SquaredEuclidean, new InvertedFileOptions { ListCount = 64, Seed = 4 }),
            "ivf-8bit" => new InvertedFileIndex(Dimension, DistanceMetric.SquaredEuclidean, new InvertedFileOptions { ListCount = 64, Seed = 4, Encoding = VectorEncoding.Scalar8Bit, RescoreDepth = 10 }),
            "ivf-product" => new InvertedFileIndex(Dimension, DistanceMetric.SquaredEuclidean, new InvertedFileOptions { ListCount = 64, Seed = 4, Encoding = VectorEncoding.ProductCodes, ProductCodeBytes = 4, RescoreDepth = 10 }),
            "exact-8bit" => new ExactIndex(Dimension, DistanceMetric.SquaredEuclidean, new ExactIndexOptions { Encoding = VectorEncoding.Scalar8Bit, RescoreDepth = 10 }),
            _ => new ExactIndex(Dimension, DistanceMetric.SquaredEuclidean),
        };
        if (!index.IsTrained)
        {
            index.Train(data);
        }

        index.AddRange(ids, data);
        return index;
    }

    internal static double Recall(VectorIndex index, float[] queries, long[][] truth, SearchOptions? options)
    {
        int d = index.Dimension;
        long found = 0;
        long wanted = 0;
        for (int q = 0; q < truth.Length; q++)
        {
            SearchHit[] hits = index.Search(queries.AsSpan(q * d, d), truth[q].Length, options);
            found += hits.Count(h => truth[q].Contains(h.Id));
            wanted += truth[q].Length;
        }

        return found / (double)wanted;
    }
}
