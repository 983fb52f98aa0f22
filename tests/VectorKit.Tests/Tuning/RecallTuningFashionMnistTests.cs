using VectorKit.Distance;
using VectorKit.Evaluation;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Indexes.Graph;
using VectorKit.Indexes.InvertedFile;
using VectorKit.IO;
using VectorKit.Tests.TestData;
using VectorKit.Tuning;
using Xunit.Abstractions;

namespace VectorKit.Tests.Tuning;

/// <summary>
/// Tuning on Fashion-MNIST (Xiao, Rasul &amp; Vollgraf 2017, arXiv:1708.07747; Debian package dataset-fashion-mnist).
/// To keep CI cheap the index holds every sixth training image (10,000 × 784); the queries are the first 1,000 test
/// images, even rows for tuning, odd rows unseen by it. Ground truth on the unseen queries comes from the float32 exact
/// index over the same 10,000 images (the kinds' oracle), not from the tuning.
/// </summary>
[Trait("Category", "Data")]
public class RecallTuningFashionMnistTests(ITestOutputHelper output)
{
    private const int K = 10;
    private const double Target = 0.95;
    private const int Step = 6;
    private const int QueryCount = 1000;

    [DataFact]
    public void EveryKindTunedTo095_MeetsItOnUnseenQueries_SquaredEuclidean() => EveryKind(DistanceMetric.SquaredEuclidean);

    [DataFact]
    public void EveryKindTunedTo095_MeetsItOnUnseenQueries_Cosine() => EveryKind(DistanceMetric.Cosine);

    [DataFact]
    public void QueriesDrawnFromTheIndex_PredictTheRecallOfRealQueries()
    {
        // Along the inverted file's recall-cost curve, recall on queries drawn from the index (default noise) against
        // recall on real test images, each against its own exact neighbours. Where tuning decides (real recall 0.85 and
        // up) the two must agree within 0.02; further down drawn queries are known to be optimistic, and are only printed.
        (float[] data, long[] ids, _, float[] unseen, int d) = Load();
        long[][] truth = Truth(data, ids, unseen, d, DistanceMetric.SquaredEuclidean);
        using VectorIndex index = Build(() => new InvertedFileIndex(d, DistanceMetric.SquaredEuclidean, new InvertedFileOptions { ListCount = 96, Seed = 5 }), data, ids);
        float[] drawn = RecallTuning.DrawQueries(index, 500, RecallTuningOptions.Default.NoiseScale, 3, CancellationToken.None);
        long[][] drawnTruth = RecallTuning.ExactNeighbors(index, drawn, K, CancellationToken.None);
        var failures = new List<string>();
        foreach (int width in new[] { 1, 2, 3, 4, 6, 8, 12 })
        {
            var at = new SearchOptions { SearchWidth = width };
            double predicted = RecallTuningTests.Recall(index, drawn, drawnTruth, at);
            double real = RecallTuningTests.Recall(index, unseen, truth, at);
            output.WriteLine($"lists probed {width}: drawn queries {predicted:0.0000}, real test images {real:0.0000}");
            if (real >= 0.85 && Math.Abs(predicted - real) > 0.02)
            {
                failures.Add($"lists probed {width}: drawn {predicted:0.0000} vs real {real:0.0000}");
            }
        }

        Assert.True(failures.Count == 0, string.Join("\n", failures));
    }

    private void EveryKind(DistanceMetric metric)
    {
        (float[] data, long[] ids, float[] tuneQueries, float[] unseen, int d) = Load();
        long[][] truth = Truth(data, ids, unseen, d, metric);
        var failures = new List<string>();
        foreach ((string name, Func<VectorIndex> create) in Variants(d, metric))
        {
            using VectorIndex index = Build(create, data, ids);
            TuningReport report = RecallTuning.Tune(index, tuneQueries, new RecallTuningOptions { TargetRecall = Target, K = K });
            double recall = RecallTuningTests.Recall(index, unseen, truth, null);
            output.WriteLine($"{name}: chose {report.Chosen.SearchWidth?.ToString() ?? "-"}/{report.Chosen.RescoreDepth?.ToString() ?? "-"} (tuning's own held-out {report.HeldOut.Recall:0.0000} [{report.HeldOut.RecallLow:0.0000}, {report.HeldOut.RecallHigh:0.0000}]); unseen queries at the defaults {recall:0.0000}; untuned {report.UntunedHeldOut.Recall:0.0000}");
            if (!report.TargetMet || recall < Target)
            {
                failures.Add($"{name}: target met {report.TargetMet}, unseen recall {recall:0.0000} < {Target}\n{report}");
            }
        }

        Assert.True(failures.Count == 0, string.Join("\n", failures));
    }

    private static IEnumerable<(string Name, Func<VectorIndex> Create)> Variants(int d, DistanceMetric metric)
    {
        yield return ("exact, 8-bit + re-scoring", () => new ExactIndex(d, metric, new ExactIndexOptions { Encoding = VectorEncoding.Scalar8Bit, RescoreDepth = K }));
        yield return ("graph, float32", () => new GraphIndex(d, metric, new GraphIndexOptions { Seed = 5, MaxDegreeOfParallelism = 1 }));
        yield return ("graph, 8-bit + re-scoring", () => new GraphIndex(d, metric, new GraphIndexOptions { Seed = 5, MaxDegreeOfParallelism = 1, Encoding = VectorEncoding.Scalar8Bit, RescoreDepth = K }));
        yield return ("inverted file, float32", () => new InvertedFileIndex(d, metric, new InvertedFileOptions { ListCount = 96, Seed = 5 }));
        yield return ("inverted file, 8-bit + re-scoring", () => new InvertedFileIndex(d, metric, new InvertedFileOptions { ListCount = 96, Seed = 5, Encoding = VectorEncoding.Scalar8Bit, RescoreDepth = K }));
        yield return ("inverted file, product codes 56 B + re-scoring", () => new InvertedFileIndex(d, metric, new InvertedFileOptions { ListCount = 96, Seed = 5, Encoding = VectorEncoding.ProductCodes, ProductCodeBytes = 56, RescoreDepth = 100 }));
    }

    private static VectorIndex Build(Func<VectorIndex> create, float[] data, long[] ids)
    {
        VectorIndex index = create();
        if (!index.IsTrained)
        {
            index.Train(data);
        }

        index.AddRange(ids, data);
        return index;
    }

    private static long[][] Truth(float[] data, long[] ids, float[] queries, int d, DistanceMetric metric)
    {
        NeighborTable table = GroundTruth.Compute(data, ids, queries, d, K, metric);
        return Enumerable.Range(0, table.QueryCount).Select(q => table[q].ToArray()).ToArray();
    }

    private static (float[] Data, long[] Ids, float[] Tune, float[] Unseen, int D) Load()
    {
        VectorSet train = FashionMnist.TrainImages;
        VectorSet test = FashionMnist.TestImages;
        int d = train.Dimension;
        int n = train.Count / Step;
        float[] data = new float[n * d];
        for (int i = 0; i < n; i++)
        {
            train.Row(i * Step).CopyTo(data.AsSpan(i * d, d));
        }

        float[] tune = new float[QueryCount / 2 * d];
        float[] unseen = new float[QueryCount / 2 * d];
        for (int q = 0; q < QueryCount; q++)
        {
            test.Row(q).CopyTo((q % 2 == 0 ? tune : unseen).AsSpan(q / 2 * d, d));
        }

        return (data, Enumerable.Range(0, n).Select(i => (long)(i * Step)).ToArray(), tune, unseen, d);
    }
}
