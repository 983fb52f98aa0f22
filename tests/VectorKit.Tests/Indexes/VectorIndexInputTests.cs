using VectorKit.Distance;
using VectorKit.Indexes;
using Xunit;

namespace VectorKit.Tests.Indexes;

/// <summary>
/// Bad input, the same for every index kind: each raises a specific exception naming the problem, and leaves the
/// index unchanged. A derived class per index kind supplies the constructor.
/// </summary>
public abstract class VectorIndexInputTests
{
    /// <summary>Creates an empty index of the kind under test.</summary>
    protected abstract IVectorIndex Create(int dimension, DistanceMetric metric);

    private IVectorIndex TwoVectors(DistanceMetric metric = DistanceMetric.SquaredEuclidean)
    {
        var index = Create(3, metric);
        index.Add(1, [1, 0, 0]);
        index.Add(2, [0, 1, 0]);
        return index;
    }

    private static void AssertUnchanged(IVectorIndex index)
    {
        Assert.Equal(2, index.Count);
        Assert.Equal([1L, 2], index.Search([1f, 0.5f, 0], 10).Select(h => h.Id));
    }

    [Theory]
    [InlineData(0)]
    [InlineData(-3)]
    public void Constructor_RejectsNonPositiveDimension(int dimension)
    {
        var e = Assert.Throws<ArgumentOutOfRangeException>(() => Create(dimension, DistanceMetric.Cosine));
        Assert.Contains("dimension must be positive", e.Message);
    }

    [Fact]
    public void Constructor_RejectsUndefinedMetric()
    {
        var e = Assert.Throws<ArgumentOutOfRangeException>(() => Create(3, (DistanceMetric)42));
        Assert.Contains("metric must be", e.Message);
    }

    [Fact]
    public void Add_WrongDimension_NamesExpectedAndActual()
    {
        using IVectorIndex index = TwoVectors();
        var e = Assert.Throws<ArgumentException>(() => index.Add(3, [1f, 2f]));
        Assert.Contains("has 2 components; the index dimension is 3", e.Message);
        AssertUnchanged(index);
    }

    [Theory]
    [InlineData(float.NaN)]
    [InlineData(float.PositiveInfinity)]
    [InlineData(float.NegativeInfinity)]
    public void Add_NonFinite_NamesTheComponent(float bad)
    {
        using IVectorIndex index = TwoVectors();
        var e = Assert.Throws<ArgumentException>(() => index.Add(3, [1f, bad, 0f]));
        Assert.Contains("[1] =", e.Message);
        AssertUnchanged(index);
    }

    [Fact]
    public void AddRange_NonFiniteInALaterRow_NamesRowAndComponent_AndAddsNothing()
    {
        using IVectorIndex index = TwoVectors();
        float[] rows = [1, 1, 1, 2, 2, 2, 3, float.NaN, 3];
        var e = Assert.Throws<ArgumentException>(() => index.AddRange([10, 11, 12], rows));
        Assert.Contains("row 2", e.Message);
        Assert.Contains("[1] = NaN", e.Message);
        AssertUnchanged(index);
    }

    [Fact]
    public void Add_DuplicateId_IsRejected()
    {
        using IVectorIndex index = TwoVectors();
        var e = Assert.Throws<ArgumentException>(() => index.Add(2, [5f, 5f, 5f]));
        Assert.Contains("Id 2 is already in the index", e.Message);
        AssertUnchanged(index);
    }

    [Fact]
    public void AddRange_DuplicateWithinTheBatchOrWithTheIndex_AddsNothing()
    {
        using IVectorIndex index = TwoVectors();
        var inBatch = Assert.Throws<ArgumentException>(() => index.AddRange([7, 7], new float[6]));
        Assert.Contains("Id 7 appears more than once", inBatch.Message);
        var withIndex = Assert.Throws<ArgumentException>(() => index.AddRange([8, 1], new float[6]));
        Assert.Contains("Id 1 is already in the index", withIndex.Message);
        AssertUnchanged(index);
    }

    [Fact]
    public void AddRange_LengthMismatch_IsRejected()
    {
        using IVectorIndex index = TwoVectors();
        var e = Assert.Throws<ArgumentException>(() => index.AddRange([5, 6], new float[5]));
        Assert.Contains("2 ids × dimension 3 need 6", e.Message);
        AssertUnchanged(index);
    }

    [Fact]
    public void Remove_UnknownId_ThrowsKeyNotFound()
    {
        using IVectorIndex index = TwoVectors();
        var e = Assert.Throws<KeyNotFoundException>(() => index.Remove(99));
        Assert.Contains("Id 99 is not in the index", e.Message);
        AssertUnchanged(index);
    }

    [Fact]
    public void Cosine_ZeroVector_IsRejectedOnAddAndOnSearch()
    {
        using IVectorIndex index = TwoVectors(DistanceMetric.Cosine);
        var add = Assert.Throws<ArgumentException>(() => index.Add(3, [0f, 0f, 0f]));
        Assert.Contains("zero vector", add.Message);
        var search = Assert.Throws<ArgumentException>(() => index.Search([0f, -0f, 0f], 1));
        Assert.Contains("zero vector", search.Message);
        var batch = Assert.Throws<ArgumentException>(() => index.SearchBatch(new float[] { 1, 0, 0, 0, 0, 0 }, 1));
        Assert.Contains("queries row 1", batch.Message);
        Assert.Equal(2, index.Count);
    }

    [Theory]
    [InlineData(0)]
    [InlineData(-1)]
    public void Search_NonPositiveK_IsRejected(int k)
    {
        using IVectorIndex index = TwoVectors();
        var e = Assert.Throws<ArgumentOutOfRangeException>(() => index.Search([1f, 0, 0], k));
        Assert.Contains("k must be positive", e.Message);
        Assert.Throws<ArgumentOutOfRangeException>(() => index.SearchBatch(new float[3], k));
        Assert.Throws<ArgumentException>(() => index.Search([1f, 0, 0], Span<SearchHit>.Empty));
    }

    [Fact]
    public void Search_WrongDimensionOrNonFiniteQuery_IsRejected()
    {
        using IVectorIndex index = TwoVectors();
        Assert.Contains("has 4 components", Assert.Throws<ArgumentException>(() => index.Search([1f, 0, 0, 0], 1)).Message);
        Assert.Contains("non-finite", Assert.Throws<ArgumentException>(() => index.Search([float.NaN, 0, 0], 1)).Message);
        Assert.Contains("not a multiple of the index dimension 3", Assert.Throws<ArgumentException>(() => index.SearchBatch(new float[4], 1)).Message);
    }

    [Fact]
    public void Search_EmptyQueryBatch_ReturnsNoQueries()
    {
        using IVectorIndex index = TwoVectors();
        Assert.Equal(0, index.SearchBatch(ReadOnlySpan<float>.Empty, 3).QueryCount);
    }

    [Fact]
    public void NullIndex_IsRejectedByTheExtension()
        => Assert.Throws<ArgumentNullException>(() => VectorIndexExtensions.Search(null!, [1f], 1));

    [Fact]
    public void SearchOptions_RejectOutOfRangeValues()
    {
        Assert.Contains("MaxDegreeOfParallelism", Assert.Throws<ArgumentOutOfRangeException>(() => new SearchOptions { MaxDegreeOfParallelism = 0 }).Message);
        Assert.Contains("SearchWidth must be positive", Assert.Throws<ArgumentOutOfRangeException>(() => new SearchOptions { SearchWidth = 0 }).Message);
    }

    [Fact]
    public void DisposedIndex_Throws()
    {
        IVectorIndex index = TwoVectors();
        index.Dispose();
        index.Dispose();
        Assert.Throws<ObjectDisposedException>(() => index.Search([1f, 0, 0], 1));
        Assert.Throws<ObjectDisposedException>(() => index.Add(5, [1f, 0, 0]));
        Assert.Throws<ObjectDisposedException>(() => index.Remove(1));
        Assert.Throws<ObjectDisposedException>(() => index.SearchBatch(new float[3], 1));
    }
}
