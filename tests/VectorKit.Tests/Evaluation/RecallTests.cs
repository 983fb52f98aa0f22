using VectorKit.Distance;
using VectorKit.Evaluation;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using Xunit;

namespace VectorKit.Tests.Evaluation;

public class RecallTests
{
    [Fact]
    public void PerfectResultsScoreOne()
    {
        long[][] truth = [[1, 2, 3], [4, 5, 6]];
        Assert.Equal(1.0, Recall.AtK(truth, [[1, 2, 3], [4, 5, 6]], 3));
    }

    [Fact]
    public void OrderWithinTheTopKDoesNotMatter()
    {
        Assert.Equal(1.0, Recall.ForQuery([1, 2, 3], [3, 1, 2], 3));
    }

    [Fact]
    public void DisjointResultsScoreZero()
    {
        long[][] truth = [[1, 2, 3], [4, 5, 6]];
        Assert.Equal(0.0, Recall.AtK(truth, [[7, 8, 9], [1, 2, 3]], 3));
    }

    [Fact]
    public void PartialOverlapIsTheExactFraction()
    {
        Assert.Equal(0.5, Recall.ForQuery([1, 2, 3, 4], [1, 9, 3, 8], 4));
        Assert.Equal(0.25, Recall.ForQuery([1, 2, 3, 4], [8, 9, 7, 4], 4));

        // Only the first k of each side count: {1, 9} ∩ {1, 2}.
        Assert.Equal(0.5, Recall.ForQuery([1, 2, 3, 4], [1, 9, 2, 3], 2));
    }

    [Fact]
    public void TheMeanIsOverQueries()
    {
        long[][] truth = [[1, 2], [3, 4], [5, 6]];
        long[][] found = [[2, 1], [7, 8], [5, 9]];
        Assert.Equal((1.0 + 0.0 + 0.5) / 3, Recall.AtK(truth, found, 2), 15);
    }

    [Fact]
    public void TheDenominatorIsCappedAtTheTruthLength()
    {
        // Only two true neighbours exist, both found: recall@10 is 1, not 0.2.
        Assert.Equal(1.0, Recall.ForQuery([1, 2], [2, 1, 5], 10));
    }

    [Fact]
    public void FewerResultsThanKCountAsMisses()
    {
        Assert.Equal(1.0 / 3, Recall.ForQuery([1, 2, 3], [1], 3), 15);
    }

    [Fact]
    public void AQueryWithNoTrueNeighboursScoresOne()
    {
        Assert.Equal(1.0, Recall.ForQuery([], [4, 5], 3));
        Assert.Equal(1.0, Recall.ForQuery([], [], 3));
    }

    [Fact]
    public void ARepeatedResultCountsOnce()
    {
        Assert.Equal(0.5, Recall.ForQuery([1, 2], [1, 1], 2));
    }

    [Fact]
    public void LongRowsUseARentedBufferAndGiveTheSameAnswer()
    {
        long[] truth = Enumerable.Range(0, 500).Select(i => (long)i).ToArray();
        long[] found = Enumerable.Range(250, 500).Select(i => (long)i).Reverse().ToArray();
        Assert.Equal(0.5, Recall.ForQuery(truth, found, 500));
    }

    [Fact]
    public void BatchResultsAreScoredAgainstATable()
    {
        var random = new Random(11);
        const int d = 8;
        float[] data = BruteForceReference.GaussianVectors(random, 200, d);
        float[] queries = BruteForceReference.GaussianVectors(random, 20, d);
        using var index = new ExactIndex(d, DistanceMetric.SquaredEuclidean);
        index.AddRange(Enumerable.Range(0, 200).Select(i => (long)i).ToArray(), data);
        BatchSearchResults results = index.SearchBatch(queries, 5);

        NeighborTable truth = GroundTruth.Compute(data, null, queries, d, 5, DistanceMetric.SquaredEuclidean);
        Assert.Equal(1.0, Recall.AtK(truth, results, 5));

        // Shift every true id so exactly none of the found ones match.
        long[][] shifted = Enumerable.Range(0, 20).Select(q => truth[q].ToArray().Select(id => id + 1000).ToArray()).ToArray();
        Assert.Equal(0.0, Recall.AtK(NeighborTable.FromRows(shifted), results, 5));
    }

    [Theory]
    [InlineData(0)]
    [InlineData(-3)]
    public void KMustBePositive(int k)
    {
        var error = Assert.Throws<ArgumentOutOfRangeException>(() => Recall.ForQuery([1], [1], k));
        Assert.Equal("k", error.ParamName);
        Assert.StartsWith($"k must be positive; got {k}.", error.Message);

        error = Assert.Throws<ArgumentOutOfRangeException>(() => Recall.AtK([[1L]], [[1L]], k));
        Assert.StartsWith($"k must be positive; got {k}.", error.Message);
    }

    [Fact]
    public void QueryCountsMustAgree()
    {
        var error = Assert.Throws<ArgumentException>(() => Recall.AtK([[1L], [2L]], [[1L]], 1));
        Assert.Equal("results", error.ParamName);
        Assert.StartsWith("results has 1 queries; truth has 2. Both must cover the same queries in the same order.", error.Message);
    }

    [Fact]
    public void AtLeastOneQueryIsNeeded()
    {
        var error = Assert.Throws<ArgumentException>(() => Recall.AtK(Array.Empty<long[]>(), Array.Empty<long[]>(), 1));
        Assert.StartsWith("truth has no queries; recall is a mean over queries and needs at least one.", error.Message);
    }

    [Fact]
    public void TrueIdsMustBeDistinct()
    {
        var error = Assert.Throws<ArgumentException>(() => Recall.ForQuery([3, 1, 3], [1], 3));
        Assert.Equal("trueIds", error.ParamName);
        Assert.StartsWith("trueIds lists id 3 more than once among its first 3; true neighbour ids must be distinct.", error.Message);

        error = Assert.Throws<ArgumentException>(() => Recall.AtK([[1L, 2], [5L, 5]], [[1L], [5L]], 2));
        Assert.StartsWith("truth row 1 lists id 5 more than once among its first 2;", error.Message);

        // A repeat beyond the cut-off is outside the compared prefix and is accepted.
        Assert.Equal(1.0, Recall.ForQuery([1, 2, 1], [1, 2], 2));
    }

    [Fact]
    public void NullArgumentsAreRejected()
    {
        Assert.Throws<ArgumentNullException>(() => Recall.AtK((IReadOnlyList<long[]>)null!, [[1L]], 1));
        Assert.Throws<ArgumentNullException>(() => Recall.AtK(NeighborTable.FromRows([[1L]]), (BatchSearchResults)null!, 1));
        var error = Assert.Throws<ArgumentException>(() => Recall.AtK([[1L], null!], [[1L], [2L]], 1));
        Assert.StartsWith("rows[1] is null;", error.Message);
    }
}
