using VectorKit.Distance;
using VectorKit.Evaluation;
using VectorKit.Indexes;
using VectorKit.Indexes.Graph;
using VectorKit.IO;
using VectorKit.Tests.TestData;
using Xunit;
using Xunit.Abstractions;

namespace VectorKit.Tests.Indexes.Graph;

/// <summary>
/// The graph index on Fashion-MNIST (Xiao, Rasul &amp; Vollgraf 2017, arXiv:1708.07747; Debian package
/// dataset-fashion-mnist): 60,000 training images as the base, squared L2, ground truth from the exact index.
/// Queries: a fixed sample of 2,000 of the 10,000 test images (every fifth), to keep the run short.
/// The graph is built once for the class, with default options and 2 build threads.
/// </summary>
[Trait("Category", "Data")]
public class GraphIndexFashionMnistTests(ITestOutputHelper output)
{
    private const int K = 10;

    private static readonly Lazy<GraphIndex> s_graph = new(() =>
    {
        VectorSet train = FashionMnist.TrainImages;
        var index = new GraphIndex(train.Dimension, DistanceMetric.SquaredEuclidean, new GraphIndexOptions { BuildParallelism = 2 });
        index.AddRange(RowNumbers(train.Count), train.Data);
        return index;
    });

    private static readonly Lazy<float[]> s_queries = new(() =>
    {
        VectorSet test = FashionMnist.TestImages;
        int d = test.Dimension;
        var sample = new float[2000 * d];
        for (int i = 0; i < 2000; i++)
        {
            test.Row(i * 5).CopyTo(sample.AsSpan(i * d, d));
        }

        return sample;
    });

    private static readonly Lazy<NeighbourTable> s_truth = new(() =>
        GroundTruth.Compute(FashionMnist.TrainImages.Data, default, s_queries.Value, 784, K, DistanceMetric.SquaredEuclidean));

    [DataFact]
    public void RecallAtTen_DefaultWidth_IsAtLeast095_AndWidth256_IsAtLeast099()
    {
        GraphIndex graph = s_graph.Value;
        double atDefault = Recall.AtK(s_truth.Value, graph.SearchBatch(s_queries.Value, K), K);
        double atWide = Recall.AtK(s_truth.Value, graph.SearchBatch(s_queries.Value, K, new SearchOptions { SearchWidth = 256 }), K);
        output.WriteLine($"recall@10 at default width {graph.Options.DefaultSearchWidth}: {atDefault:F4}; at width 256: {atWide:F4}; {graph.MemoryBytes / (double)graph.Count:F0} bytes/vector");
        Assert.True(atDefault >= 0.95, $"recall@10 at the default width was {atDefault:F4}");
        Assert.True(atWide >= 0.99, $"recall@10 at width 256 was {atWide:F4}");
        // Every node reachable: pruning among Fashion-MNIST's many near-duplicates cuts some nodes off, and the
        // reachability pass at the end of the batch must have linked every one of them back.
        GraphChecks.AssertSound(graph);
        output.WriteLine($"{graph.OrphansAttached} of {graph.Count} nodes were attached by the reachability pass");
    }

    [DataFact]
    public void FilterPassingTenPercent_RecallAgainstExactFilteredResults_IsAtLeast090()
    {
        // Ids ending in 3: 10 % of the items, spread over all classes.
        static bool Filter(long id) => id % 10 == 3;
        var options = new SearchOptions { Filter = Filter };
        VectorSet train = FashionMnist.TrainImages;
        using var exact = new VectorKit.Indexes.Exact.ExactIndex(784, DistanceMetric.SquaredEuclidean);
        exact.AddRange(RowNumbers(train.Count), train.Data);
        NeighbourTable truth = NeighbourTable.FromResults(exact.SearchBatch(s_queries.Value, K, options));

        BatchSearchResults found = s_graph.Value.SearchBatch(s_queries.Value, K, options);
        double recall = Recall.AtK(truth, found, K);
        output.WriteLine($"filtered (10 %) recall@10 at the default width: {recall:F4}");
        for (int q = 0; q < found.QueryCount; q++)
        {
            foreach (SearchHit hit in found[q])
            {
                Assert.True(Filter(hit.Id));
            }
        }

        Assert.True(recall >= 0.90, $"filtered recall@10 was {recall:F4}");
    }

    private static long[] RowNumbers(int n) => Enumerable.Range(0, n).Select(i => (long)i).ToArray();
}
