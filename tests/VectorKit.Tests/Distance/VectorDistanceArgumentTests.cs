using VectorKit.Distance;
using static VectorKit.Tests.Distance.KernelOracle;

namespace VectorKit.Tests.Distance;

/// <summary>The public distance functions reject bad arguments with exceptions naming the parameter and the numbers.</summary>
[Trait("Category", "Kernels")]
public class VectorDistanceArgumentTests
{
    [Fact]
    public void PairFunctionsRejectDifferentLengths()
    {
        float[] x = new float[3], y = new float[4];
        const string message = "The vectors have different lengths: 3 and 4. (Parameter 'y')";
        AssertArgument(message, "y", () => VectorDistance.Dot(x, y));
        AssertArgument(message, "y", () => VectorDistance.SquaredEuclidean(x, y));
        AssertArgument(message, "y", () => VectorDistance.CosineSimilarity(x, y));
        foreach (DistanceMetric metric in Enum.GetValues<DistanceMetric>())
        {
            AssertArgument(message, "y", () => VectorDistance.Compute(metric, x, y));
        }
    }

    [Fact]
    public void ComputeRejectsAnUndefinedMetric()
    {
        var e = Assert.Throws<ArgumentOutOfRangeException>(() => VectorDistance.Compute((DistanceMetric)99, new float[2], new float[2]));
        Assert.Equal("metric", e.ParamName);
        Assert.StartsWith("metric must be SquaredEuclidean, InnerProduct or Cosine; got 99.", e.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void ComputeManyRejectsAnEmptyQuery()
        => AssertArgument(
            "The query is empty; it needs at least one component. (Parameter 'query')",
            "query",
            () => VectorDistance.ComputeMany(DistanceMetric.SquaredEuclidean, [], new float[4], new float[1]));

    [Fact]
    public void ComputeManyRejectsVectorsThatAreNotWholeRows()
        => AssertArgument(
            "vectors has 10 components, not a multiple of the query dimension 4. (Parameter 'vectors')",
            "vectors",
            () => VectorDistance.ComputeMany(DistanceMetric.SquaredEuclidean, new float[4], new float[10], new float[2]));

    [Theory]
    [InlineData(2)]
    [InlineData(4)]
    public void ComputeManyRejectsADistanceSpanOfTheWrongLength(int length)
        => AssertArgument(
            $"distances has {length} elements; 3 rows need exactly 3. (Parameter 'distances')",
            "distances",
            () => VectorDistance.ComputeMany(DistanceMetric.InnerProduct, new float[4], new float[12], new float[length]));

    [Fact]
    public void ComputeManyRejectsAnUndefinedMetric()
    {
        var e = Assert.Throws<ArgumentOutOfRangeException>(() => VectorDistance.ComputeMany((DistanceMetric)(-1), new float[2], new float[4], new float[2]));
        Assert.Equal("metric", e.ParamName);
        Assert.StartsWith("metric must be SquaredEuclidean, InnerProduct or Cosine; got -1.", e.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void ComputeManyAcceptsZeroRows()
        => VectorDistance.ComputeMany(DistanceMetric.Cosine, new float[3], [], []);

    [Theory]
    [InlineData(1)]
    [InlineData(17)]
    [InlineData(784)]
    public void ComputeManyGivesEachRowItsPairDistance(int n)
    {
        const int rows = 9;
        float[] query = Random(n, seed: 7);
        float[] vectors = Random(rows * n, seed: 8);
        var distances = new float[rows];
        foreach (DistanceMetric metric in Enum.GetValues<DistanceMetric>())
        {
            VectorDistance.ComputeMany(metric, query, vectors, distances);
            for (int r = 0; r < rows; r++)
            {
                ReadOnlySpan<float> row = vectors.AsSpan(r * n, n);
                double expected = metric switch
                {
                    DistanceMetric.SquaredEuclidean => KernelOracle.SquaredEuclidean(query, row),
                    DistanceMetric.InnerProduct => -KernelOracle.Dot(query, row),
                    _ => 1 - KernelOracle.CosineSimilarity(query, row),
                };
                double scale = metric == DistanceMetric.SquaredEuclidean ? Math.Abs(expected) : metric == DistanceMetric.InnerProduct ? AbsoluteProductSum(query, row) : 2;
                AssertWithin(expected, distances[r], Tolerance(n, scale), $"{metric}, n = {n}, row {r}");
            }
        }
    }

    private static void AssertArgument(string message, string paramName, Action action)
    {
        var e = Assert.Throws<ArgumentException>(action);
        Assert.Equal(paramName, e.ParamName);
        Assert.Equal(message, e.Message);
    }
}
