using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.InvertedFile;
using VectorKit.Quantization;
using VectorKit.Tests.TestData;
using Xunit;

namespace VectorKit.Tests.Indexes.InvertedFile;

/// <summary>The shared bad-input checks on a trained inverted-file index with float32 lists, plus its own training checks.</summary>
public class InvertedFileIndexInputTests : VectorIndexInputTests
{
    protected virtual InvertedFileOptions Options(int dimension) => new() { ListCount = 2, SearchWidth = 2 };

    protected override IVectorIndex Create(int dimension, DistanceMetric metric)
    {
        var index = new InvertedFileIndex(dimension, metric, Options(dimension));
        index.Train(ClusteredData.Generate(300, dimension, 4, 0.5f, seed: 1, normalise: metric == DistanceMetric.Cosine));
        return index;
    }

    private static float[] Sample(int rows, int d) => ClusteredData.Generate(rows, d, 4, 0.5f, seed: 2);

    [Fact]
    public void Untrained_AddAndSearch_ThrowNotTrained_AndChangeNothing()
    {
        using var index = new InvertedFileIndex(4, DistanceMetric.SquaredEuclidean, new InvertedFileOptions { ListCount = 8 });
        Assert.False(index.IsTrained);
        var add = Assert.Throws<IndexNotTrainedException>(() => index.Add(1, [1f, 2, 3, 4]));
        Assert.Contains("not trained: call Train with a sample of at least 8 vectors", add.Message);
        Assert.Throws<IndexNotTrainedException>(() => index.AddRange([1, 2], new float[8]));
        Assert.Throws<IndexNotTrainedException>(() => index.Search([1f, 2, 3, 4], 3));
        Assert.Throws<IndexNotTrainedException>(() => index.SearchBatch(new float[8], 3));
        Assert.Equal(0, index.Count);
        Assert.False(index.IsTrained);

        // Bad vectors are still reported as such before the training state is looked at.
        Assert.Contains("has 3 components", Assert.Throws<ArgumentException>(() => index.Add(1, [1f, 2, 3])).Message);
    }

    [Fact]
    public void FewerTrainingRowsThanLists_NamesTheMinimum_AndLeavesTheIndexUntrained()
    {
        using var index = new InvertedFileIndex(4, DistanceMetric.SquaredEuclidean, new InvertedFileOptions { ListCount = 64 });
        var e = Assert.Throws<ArgumentException>(() => index.Train(Sample(63, 4)));
        Assert.Contains("sample has 63 rows; an inverted file with 64 lists needs at least 64 training rows", e.Message);
        Assert.Equal("sample", e.ParamName);
        Assert.False(index.IsTrained);

        using var product = new InvertedFileIndex(4, DistanceMetric.SquaredEuclidean, new InvertedFileOptions { ListCount = 4, Encoding = VectorEncoding.ProductCodes, ProductCodeBytes = 2 });
        var p = Assert.Throws<ArgumentException>(() => product.Train(Sample(200, 4)));
        Assert.Contains("needs at least 256 training rows", p.Message);
        Assert.False(product.IsTrained);
    }

    [Fact]
    public void NaNInTrainingData_NamesRowAndComponent_AndLeavesTheIndexUntrained()
    {
        using var index = new InvertedFileIndex(4, DistanceMetric.SquaredEuclidean, new InvertedFileOptions { ListCount = 4 });
        float[] sample = Sample(100, 4);
        sample[(17 * 4) + 2] = float.NaN;
        var e = Assert.Throws<ArgumentException>(() => index.Train(sample));
        Assert.Contains("sample row 17 has a non-finite component: [2] = NaN", e.Message);
        Assert.False(index.IsTrained);
        Assert.Throws<IndexNotTrainedException>(() => index.Search([1f, 2, 3, 4], 1));
    }

    [Fact]
    public void CodeSizeThatDoesNotDivideTheDimension_IsRejected_ListingTheDivisors()
    {
        var e = Assert.Throws<ArgumentException>(() => new InvertedFileIndex(784, DistanceMetric.SquaredEuclidean, new InvertedFileOptions { Encoding = VectorEncoding.ProductCodes, ProductCodeBytes = 32 }));
        Assert.Contains("A code of 32 bytes does not divide the dimension 784", e.Message);
        Assert.Contains("8, 14, 16, 28, 49, 56, 98, 112, 196", e.Message);

        // Only product codes care: other storage ignores the code size.
        using var flat = new InvertedFileIndex(784, DistanceMetric.SquaredEuclidean, new InvertedFileOptions { ProductCodeBytes = 32 });
    }

    [Fact]
    public void TrainingAgainAfterAdding_IsRejected_AndChangesNothing()
    {
        using IVectorIndex created = Create(3, DistanceMetric.SquaredEuclidean);
        var index = (InvertedFileIndex)created;
        index.Add(1, [1f, 0, 0]);
        float[] before = index.GetCentroids().ToArray();
        var e = Assert.Throws<InvalidOperationException>(() => index.Train(Sample(300, 3)));
        Assert.Contains("holds 1 vectors", e.Message);
        Assert.Equal(before, index.GetCentroids().ToArray());
        Assert.Equal(1, index.Count);
    }

    [Fact]
    public void BadTrainingShapeOrCosineZeroRow_IsRejected()
    {
        using var index = new InvertedFileIndex(3, DistanceMetric.Cosine, new InvertedFileOptions { ListCount = 2 });
        Assert.Contains("not a multiple of the index dimension 3", Assert.Throws<ArgumentException>(() => index.Train(new float[10])).Message);
        float[] sample = Sample(10, 3);
        sample.AsSpan(6, 3).Clear();
        Assert.Contains("sample row 2 is a zero vector", Assert.Throws<ArgumentException>(() => index.Train(sample)).Message);
        Assert.False(index.IsTrained);
    }

    [Fact]
    public void CancelledTraining_LeavesTheIndexUntrained()
    {
        using var index = new InvertedFileIndex(8, DistanceMetric.SquaredEuclidean, new InvertedFileOptions { ListCount = 16 });
        using var cancelled = new CancellationTokenSource();
        cancelled.Cancel();
        Assert.ThrowsAny<OperationCanceledException>(() => index.Train(Sample(500, 8), null, cancelled.Token));
        Assert.False(index.IsTrained);
    }

    [Fact]
    public void InvertedFileOptions_NameTheOptionAndTheAllowedRange()
    {
        Assert.Contains("ListCount must be in [1, 1048576]; got 0", Assert.Throws<ArgumentOutOfRangeException>(() => new InvertedFileOptions { ListCount = 0 }).Message);
        Assert.Contains("SearchWidth must be positive; got 0", Assert.Throws<ArgumentOutOfRangeException>(() => new InvertedFileOptions { SearchWidth = 0 }).Message);
        Assert.Contains("Encoding must be one of Float32, Scalar8Bit, ProductCodes for InvertedFileOptions", Assert.Throws<ArgumentOutOfRangeException>(() => new InvertedFileOptions { Encoding = (VectorEncoding)7 }).Message);
        Assert.Contains("ProductCodeBytes must be in [1, 4096]; got 0", Assert.Throws<ArgumentOutOfRangeException>(() => new InvertedFileOptions { ProductCodeBytes = 0 }).Message);
        Assert.Contains("RescoreDepth must be 0 (off) or in [1, 100000]; got -1", Assert.Throws<ArgumentOutOfRangeException>(() => new InvertedFileOptions { RescoreDepth = -1 }).Message);
        Assert.Contains("MaxIterations must be in [0, 10000]", Assert.Throws<ArgumentOutOfRangeException>(() => new InvertedFileOptions { MaxIterations = -1 }).Message);
        Assert.Contains("SampleSize must be positive", Assert.Throws<ArgumentOutOfRangeException>(() => new InvertedFileOptions { SampleSize = 0 }).Message);
        Assert.Contains("ProductCodeRotation must be None or VarianceBalanced; got 9", Assert.Throws<ArgumentOutOfRangeException>(() => new InvertedFileOptions { ProductCodeRotation = (SubspaceRotation)9 }).Message);
        Assert.Contains("MaxDegreeOfParallelism must be -1", Assert.Throws<ArgumentOutOfRangeException>(() => new InvertedFileOptions { MaxDegreeOfParallelism = -2 }).Message);
        Assert.Contains("RescoreDepth must be 0 (off) or positive", Assert.Throws<ArgumentOutOfRangeException>(() => new SearchOptions { RescoreDepth = -3 }).Message);
    }
}

/// <summary>The shared bad-input checks with product codes and exact re-scoring.</summary>
public class InvertedFileProductCodeInputTests : InvertedFileIndexInputTests
{
    protected override InvertedFileOptions Options(int dimension)
        => new() { ListCount = 2, SearchWidth = 2, Encoding = VectorEncoding.ProductCodes, ProductCodeBytes = Math.Max(1, dimension), RescoreDepth = 10 };
}

/// <summary>The shared bad-input checks with 8-bit scalar codes and exact re-scoring.</summary>
public class InvertedFileScalarCodeInputTests : InvertedFileIndexInputTests
{
    protected override InvertedFileOptions Options(int dimension)
        => new() { ListCount = 2, SearchWidth = 2, Encoding = VectorEncoding.Scalar8Bit, RescoreDepth = 10 };
}
