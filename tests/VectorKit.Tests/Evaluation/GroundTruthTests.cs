using VectorKit.Distance;
using VectorKit.Evaluation;
using VectorKit.Indexes.Exact;
using Xunit;

namespace VectorKit.Tests.Evaluation;

public class GroundTruthTests
{
    [Theory]
    [InlineData(DistanceMetric.SquaredEuclidean, 17)]
    [InlineData(DistanceMetric.InnerProduct, 17)]
    [InlineData(DistanceMetric.SquaredEuclidean, 40)]
    [InlineData(DistanceMetric.InnerProduct, 40)]
    public void MatchesADoublePrecisionLoopOnIntegerData(DistanceMetric metric, int dimension)
    {
        // Integer components keep every float sum exact, so equal distances are exact ties and the order is fixed by id.
        var random = new Random(dimension * 31 + (int)metric);
        const int n = 400;
        float[] data = BruteForceReference.IntegerVectors(random, n, dimension, 3);
        float[] queries = BruteForceReference.IntegerVectors(random, 30, dimension, 3);
        long[] ids = ShuffledIds(random, n);

        NeighborTable truth = GroundTruth.Compute(data, ids, queries, dimension, 10, metric);

        AssertRowsEqual(BruteForceReference.Neighbours(data, ids, queries, dimension, 10, metric), truth);
    }

    [Fact]
    public void MatchesADoublePrecisionLoopUnderCosine()
    {
        // Continuous data: no two cosine distances come within float rounding of each other at this size.
        var random = new Random(5);
        const int n = 400, d = 24;
        float[] data = BruteForceReference.GaussianVectors(random, n, d);
        float[] queries = BruteForceReference.GaussianVectors(random, 30, d);
        long[] ids = ShuffledIds(random, n);

        NeighborTable truth = GroundTruth.Compute(data, ids, queries, d, 10, DistanceMetric.Cosine);

        AssertRowsEqual(BruteForceReference.Neighbours(data, ids, queries, d, 10, DistanceMetric.Cosine), truth);
    }

    [Fact]
    public void DataFarFromTheOriginKeepsItsExactOrder()
    {
        // A common offset of 3000 makes squared norms about 3·10⁸, beyond float's exact integers, while the true distances
        // stay small integers: a norm-expansion formula would lose them to cancellation; direct differences do not.
        var random = new Random(13);
        const int n = 500, d = 32;
        float[] data = BruteForceReference.IntegerVectors(random, n, d, 3).Select(x => x + 3000f).ToArray();
        float[] queries = BruteForceReference.IntegerVectors(random, 40, d, 3).Select(x => x + 3000f).ToArray();
        long[] ids = ShuffledIds(random, n);

        NeighborTable truth = GroundTruth.Compute(data, ids, queries, d, 10, DistanceMetric.SquaredEuclidean);

        AssertRowsEqual(BruteForceReference.Neighbours(data, ids, queries, d, 10, DistanceMetric.SquaredEuclidean), truth);
    }

    [Fact]
    public void AnInvalidQueryIsReportedDirectly()
    {
        float[] data = [1, 0, 0, 1];
        var zero = Assert.Throws<ArgumentException>(() => GroundTruth.Compute(data, null, [1, 1, 0, 0], 2, 1, DistanceMetric.Cosine));
        Assert.StartsWith("queries row 1 is a zero vector", zero.Message);

        var nan = Assert.Throws<ArgumentException>(() => GroundTruth.Compute(data, null, [1, 1, 0, float.NaN], 2, 1, DistanceMetric.SquaredEuclidean));
        Assert.StartsWith("queries row 1 has a non-finite component: [1] = NaN.", nan.Message);
    }

    [Fact]
    public void ManyExactTiesAreBrokenByAscendingId()
    {
        // Four components in {-1, 0, 1}: only 81 distinct vectors among 500, so most distances tie.
        var random = new Random(8);
        const int n = 500, d = 4;
        float[] data = BruteForceReference.IntegerVectors(random, n, d, 1);
        float[] queries = BruteForceReference.IntegerVectors(random, 40, d, 1);
        long[] ids = ShuffledIds(random, n);

        NeighborTable truth = GroundTruth.Compute(data, ids, queries, d, 25, DistanceMetric.SquaredEuclidean);

        AssertRowsEqual(BruteForceReference.Neighbours(data, ids, queries, d, 25, DistanceMetric.SquaredEuclidean), truth);
    }

    [Fact]
    public void WithoutIdsRowNumbersAreUsed()
    {
        var random = new Random(2);
        float[] data = BruteForceReference.IntegerVectors(random, 50, 6, 4);
        float[] queries = BruteForceReference.IntegerVectors(random, 5, 6, 4);
        long[] rowNumbers = Enumerable.Range(0, 50).Select(i => (long)i).ToArray();

        NeighborTable truth = GroundTruth.Compute(data, null, queries, 6, 7, DistanceMetric.SquaredEuclidean);

        AssertRowsEqual(BruteForceReference.Neighbours(data, rowNumbers, queries, 6, 7, DistanceMetric.SquaredEuclidean), truth);
    }

    [Fact]
    public void KLargerThanTheDataSetReturnsEveryVector()
    {
        float[] data = [1, 0, 0, 1, 2, 2];
        NeighborTable truth = GroundTruth.Compute(data, [10, 20, 30], [0, 0], 2, 50, DistanceMetric.SquaredEuclidean);
        Assert.Equal(1, truth.QueryCount);
        Assert.Equal(new long[] { 10, 20, 30 }, truth[0].ToArray());
    }

    [Fact]
    public void AnEmptyDataSetGivesEmptyRows()
    {
        NeighborTable truth = GroundTruth.Compute([], null, [1, 2, 3, 4], 2, 3, DistanceMetric.InnerProduct);
        Assert.Equal(2, truth.QueryCount);
        Assert.True(truth[0].IsEmpty);
        Assert.True(truth[1].IsEmpty);
    }

    [Fact]
    public void TheIndexOverloadGivesTheSameTable()
    {
        var random = new Random(4);
        float[] data = BruteForceReference.GaussianVectors(random, 300, 12);
        float[] queries = BruteForceReference.GaussianVectors(random, 20, 12);
        using var index = new ExactIndex(12, DistanceMetric.InnerProduct);
        index.AddRange(Enumerable.Range(0, 300).Select(i => (long)i).ToArray(), data);

        NeighborTable fromIndex = GroundTruth.Compute(index, queries, 8);
        NeighborTable fromData = GroundTruth.Compute(data, null, queries, 12, 8, DistanceMetric.InnerProduct);

        for (int q = 0; q < 20; q++)
        {
            Assert.Equal(fromData[q].ToArray(), fromIndex[q].ToArray());
        }
    }

    [Fact]
    public void ProgressReachesTheQueryCount()
    {
        var random = new Random(6);
        float[] data = BruteForceReference.GaussianVectors(random, 100, 4);
        float[] queries = BruteForceReference.GaussianVectors(random, 200, 4);
        var seen = new SynchronousProgress<int>();

        GroundTruth.Compute(data, null, queries, 4, 3, DistanceMetric.SquaredEuclidean, seen);

        Assert.Equal(200, seen.Values.Max());
    }

    [Fact]
    public void ACancelledTokenStopsTheSearch()
    {
        float[] data = BruteForceReference.GaussianVectors(new Random(1), 100, 4);
        using var cancelled = new CancellationTokenSource();
        cancelled.Cancel();
        Assert.ThrowsAny<OperationCanceledException>(() => GroundTruth.Compute(data, null, data, 4, 3, DistanceMetric.SquaredEuclidean, null, cancelled.Token));
    }

    [Fact]
    public void ArgumentsAreValidated()
    {
        float[] data = [1, 2, 3, 4];
        var k = Assert.Throws<ArgumentOutOfRangeException>(() => GroundTruth.Compute(data, null, data, 2, 0, DistanceMetric.SquaredEuclidean));
        Assert.StartsWith("k must be positive; got 0.", k.Message);

        var dimension = Assert.Throws<ArgumentOutOfRangeException>(() => GroundTruth.Compute(data, null, data, 0, 1, DistanceMetric.SquaredEuclidean));
        Assert.StartsWith("dimension must be positive; got 0.", dimension.Message);

        var metric = Assert.Throws<ArgumentOutOfRangeException>(() => GroundTruth.Compute(data, null, data, 2, 1, (DistanceMetric)9));
        Assert.Equal("metric", metric.ParamName);

        var baseLength = Assert.Throws<ArgumentException>(() => GroundTruth.Compute(data, null, data, 3, 1, DistanceMetric.SquaredEuclidean));
        Assert.StartsWith("baseVectors has 4 components, not a multiple of the dimension 3.", baseLength.Message);

        var queryLength = Assert.Throws<ArgumentException>(() => GroundTruth.Compute(data, null, [1, 2, 3], 2, 1, DistanceMetric.SquaredEuclidean));
        Assert.StartsWith("queries has 3 components, not a multiple of the dimension 2.", queryLength.Message);

        var ids = Assert.Throws<ArgumentException>(() => GroundTruth.Compute(data, [1, 2, 3], data, 2, 1, DistanceMetric.SquaredEuclidean));
        Assert.Equal("ids", ids.ParamName);
        Assert.StartsWith("ids has 3 elements; baseVectors holds 2 rows of dimension 2.", ids.Message);

        var repeated = Assert.Throws<ArgumentException>(() => GroundTruth.Compute(data, [7, 7], data, 2, 1, DistanceMetric.SquaredEuclidean));
        Assert.StartsWith("Id 7 appears more than once in ids", repeated.Message);

        Assert.Throws<ArgumentNullException>(() => GroundTruth.Compute(null!, data, 1));
        using var index = new ExactIndex(2, DistanceMetric.Cosine);
        var indexK = Assert.Throws<ArgumentOutOfRangeException>(() => GroundTruth.Compute(index, data, -1));
        Assert.StartsWith("k must be positive; got -1.", indexK.Message);
    }

    private static long[] ShuffledIds(Random random, int n)
    {
        // Ids unrelated to row order (and sparse), so a tie broken by row instead of id would show.
        long[] ids = Enumerable.Range(0, n).Select(i => 1_000_000L + (i * 7L)).ToArray();
        random.Shuffle(ids);
        return ids;
    }

    private static void AssertRowsEqual(long[][] expected, NeighborTable actual)
    {
        Assert.Equal(expected.Length, actual.QueryCount);
        for (int q = 0; q < expected.Length; q++)
        {
            Assert.Equal(expected[q], actual[q].ToArray());
        }
    }
}
