using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Indexes.Graph;
using VectorKit.Indexes.InvertedFile;
using VectorKit.Tests.TestData;

namespace VectorKit.Tests.Tuning;

public class TunedDefaultsTests
{
    private const int Dimension = 8;

    [Fact]
    public void TunedWidth_IsTheGraphsDefault_AndACallsWidthStillWins()
    {
        using GraphIndex graph = Graph(out float[] queries);
        var narrow = new SearchOptions { SearchWidth = 10 };
        var wide = new SearchOptions { SearchWidth = 200 };
        Assert.NotEqual(Results(graph, queries, narrow), Results(graph, queries, wide)); // the widths differ on this data, so the checks below can fail

        graph.ApplyTunedDefaults(new TunedSearchDefaults(10, null, 0.9, 10));
        Assert.Equal(Results(graph, queries, narrow), Results(graph, queries, null));
        Assert.Equal(Results(graph, queries, wide), Results(graph, queries, wide));

        graph.ApplyTunedDefaults(new TunedSearchDefaults(200, null, 0.9, 10));
        Assert.Equal(Results(graph, queries, wide), Results(graph, queries, null));
        Assert.Equal(Results(graph, queries, narrow), Results(graph, queries, narrow));

        graph.ApplyTunedDefaults(null);
        Assert.Equal(Results(graph, queries, new SearchOptions { SearchWidth = graph.Options.SearchWidth }), Results(graph, queries, null));
    }

    [Fact]
    public void TunedProbesAndDepth_AreTheInvertedFilesDefaults_InSingleAndBatchSearches()
    {
        float[] data = ClusteredData.Generate(2000, Dimension, 20, 0.4f, 5);
        using var index = new InvertedFileIndex(Dimension, DistanceMetric.SquaredEuclidean, new InvertedFileOptions { ListCount = 32, SearchWidth = 1, Encoding = VectorEncoding.Scalar8Bit, RescoreDepth = 10, Seed = 3 });
        index.Train(data);
        index.AddRange(Enumerable.Range(0, 2000).Select(i => (long)i).ToArray(), data);
        float[] queries = ClusteredData.Generate(40, Dimension, 20, 0.4f, 6);
        var explicitSettings = new SearchOptions { SearchWidth = 7, RescoreDepth = 40 };
        Assert.NotEqual(Results(index, queries, explicitSettings), Results(index, queries, null));

        index.ApplyTunedDefaults(new TunedSearchDefaults(7, 40, 0.95, 10));
        Assert.Equal(Results(index, queries, explicitSettings), Results(index, queries, null));
        BatchSearchResults batch = index.SearchBatch(queries, 10);
        for (int q = 0; q < 40; q++)
        {
            Assert.Equal(index.Search(queries.AsSpan(q * Dimension, Dimension), 10, explicitSettings), batch[q].ToArray());
        }
    }

    [Fact]
    public void Defaults_ThatDoNotFitTheIndex_AreRejectedWithTheReason()
    {
        using var exact = new ExactIndex(Dimension, DistanceMetric.SquaredEuclidean);
        var e = Assert.Throws<ArgumentException>(() => exact.ApplyTunedDefaults(new TunedSearchDefaults(5, null, 0.9, 10)));
        Assert.Contains("ExactIndex has no search width, yet the defaults set it to 5", e.Message);
        e = Assert.Throws<ArgumentException>(() => exact.ApplyTunedDefaults(new TunedSearchDefaults(null, 20, 0.9, 10)));
        Assert.Contains("keeps no full vectors to re-score with, yet the defaults set a re-scoring depth of 20", e.Message);

        using var ivf = new InvertedFileIndex(Dimension, DistanceMetric.SquaredEuclidean, new InvertedFileOptions { ListCount = 16 });
        e = Assert.Throws<ArgumentException>(() => ivf.ApplyTunedDefaults(new TunedSearchDefaults(17, null, 0.9, 10)));
        Assert.Contains("The default search width 17 exceeds this index's largest, 16", e.Message);
        Assert.Null(ivf.TunedDefaults);

        Assert.Throws<ArgumentOutOfRangeException>(() => new TunedSearchDefaults(0, null, 0.9, 10));
        Assert.Throws<ArgumentOutOfRangeException>(() => new TunedSearchDefaults(null, -1, 0.9, 10));
        Assert.Throws<ArgumentOutOfRangeException>(() => new TunedSearchDefaults(null, null, 0, 10));
        Assert.Throws<ArgumentOutOfRangeException>(() => new TunedSearchDefaults(null, null, double.NaN, 10));
        Assert.Throws<ArgumentOutOfRangeException>(() => new TunedSearchDefaults(null, null, 0.9, 0));
    }

    [Fact]
    public void ChangesSinceTuning_CountsEveryItemWritten_AndRestartsWhenDefaultsAreApplied()
    {
        using var exact = new ExactIndex(2, DistanceMetric.SquaredEuclidean);
        exact.AddRange([1, 2, 3], [1, 0, 0, 1, 1, 1]);
        Assert.Equal(3, exact.ChangesSinceTuning);
        exact.ApplyTunedDefaults(new TunedSearchDefaults(null, null, 0.95, 2));
        Assert.Equal(0, exact.ChangesSinceTuning);
        exact.AddOrReplaceRange([3, 4], [2, 2, 3, 3]);
        exact.Remove(1);
        Assert.Throws<KeyNotFoundException>(() => exact.Remove(99));
        Assert.Equal(3, exact.ChangesSinceTuning);
        Assert.Equal(0.95, exact.TunedDefaults!.TargetRecall);
    }

    private static GraphIndex Graph(out float[] queries)
    {
        float[] data = ClusteredData.Generate(3000, Dimension, 30, 0.6f, 1);
        var graph = new GraphIndex(Dimension, DistanceMetric.SquaredEuclidean, new GraphIndexOptions { LinksPerNode = 4, BuildWidth = 16, Seed = 2, MaxDegreeOfParallelism = 1 });
        graph.AddRange(Enumerable.Range(0, 3000).Select(i => (long)i).ToArray(), data);
        queries = ClusteredData.Generate(50, Dimension, 30, 0.6f, 9);
        return graph;
    }

    private static SearchHit[][] Results(VectorIndex index, float[] queries, SearchOptions? options)
        => Enumerable.Range(0, queries.Length / Dimension).Select(q => index.Search(queries.AsSpan(q * Dimension, Dimension), 10, options)).ToArray();
}
