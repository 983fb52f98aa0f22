using FsCheck;
using FsCheck.Xunit;
using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using Xunit;

namespace VectorKit.Tests.Indexes;

/// <summary>
/// The list and memory overloads of <see cref="VectorIndexExtensions"/>: each must compile for the shapes embedding code
/// produces, resolve without ambiguity, and give exactly what the flat span members give for the same rows.
/// </summary>
public sealed class VectorIndexListOverloadTests
{
    private const int Dimension = 3;

    private static readonly float[][] s_rows =
    [
        [1, 0, 0], [0, 1, 0], [0, 0, 1], [1, 1, 0], [0.5f, -2, 3],
    ];

    private static readonly long[] s_ids = [10, 20, 30, 40, 50];

    private static ExactIndex Filled()
    {
        var index = new ExactIndex(Dimension, DistanceMetric.SquaredEuclidean);
        index.AddRange(s_ids, s_rows);
        return index;
    }

    private static float[] Flat(float[][] rows) => rows.SelectMany(r => r).ToArray();

    [Fact]
    public void Every_embedding_shape_compiles_and_resolves_to_the_same_results()
    {
        using ExactIndex index = Filled();
        float[] query = [0.9f, 0.1f, 0];
        float[][] jagged = [query, [0, 0, 1]];
        List<float[]> list = [.. jagged];
        ReadOnlyMemory<float>[] memories = [query, jagged[1]];
        List<ReadOnlyMemory<float>> memoryList = [.. memories];
        float[] flat = Flat(jagged);

        // Single queries: array, memory, span and collection expression all reach the same search.
        SearchHit[] expected = index.Search(query.AsSpan(), 3);
        Assert.Equal(expected, index.Search(query, 3));
        Assert.Equal(expected, index.Search(query.AsMemory(), 3));
        Assert.Equal(expected, index.Search((ReadOnlyMemory<float>)query, 3, SearchOptions.Default));
        Assert.Equal(expected, index.Search([0.9f, 0.1f, 0], 3));

        // Batches: the flat array still binds to the interface member (2 queries of 3 components, not 1 row of 6).
        BatchSearchResults reference = index.SearchBatch(flat.AsSpan(), 2);
        Assert.Equal(2, reference.QueryCount);
        AssertSame(reference, index.SearchBatch(flat, 2));
        AssertSame(reference, index.SearchBatch(jagged, 2));
        AssertSame(reference, index.SearchBatch(list, 2));
        AssertSame(reference, index.SearchBatch(memories, 2));
        AssertSame(reference, index.SearchBatch(memoryList, 2, SearchOptions.Default, progress: null, CancellationToken.None));
    }

    [Fact]
    public void Every_embedding_shape_adds_the_same_rows()
    {
        float[] flat = Flat(s_rows);
        using var reference = new ExactIndex(Dimension, DistanceMetric.SquaredEuclidean);
        reference.AddRange(s_ids, flat.AsSpan());

        IReadOnlyList<float[]> asList = [.. s_rows];
        ReadOnlyMemory<float>[] asMemory = s_rows.Select(r => (ReadOnlyMemory<float>)r).ToArray();
        foreach (Action<IVectorIndex> add in new Action<IVectorIndex>[]
        {
            i => i.AddRange(s_ids, s_rows),
            i => i.AddRange(s_ids, asList),
            i => i.AddRange(s_ids, new List<float[]>(s_rows)),
            i => i.AddRange(s_ids, asMemory),
            i => i.AddRange(s_ids.AsSpan(), new List<ReadOnlyMemory<float>>(asMemory)),
        })
        {
            using var index = new ExactIndex(Dimension, DistanceMetric.SquaredEuclidean);
            add(index);
            Assert.Equal(reference.GetIds(), index.GetIds());
            foreach (long id in s_ids)
            {
                float[] want = new float[Dimension];
                float[] got = new float[Dimension];
                Assert.True(reference.TryGetVector(id, want));
                Assert.True(index.TryGetVector(id, got));
                Assert.Equal(want, got);
            }
        }
    }

    [Property(MaxTest = 40)]
    public void Memory_rows_sliced_from_one_buffer_search_like_the_flat_buffer(PositiveInt countSeed, int seed)
    {
        int count = 1 + (countSeed.Get % 12);
        var random = new Random(seed);
        float[] buffer = new float[(count * Dimension) + 7];
        for (int i = 0; i < buffer.Length; i++)
        {
            buffer[i] = (float)((random.NextDouble() * 4) - 2);
        }

        // Rows start at an odd offset inside a larger buffer, as slices of a model's output tensor would.
        var rows = new ReadOnlyMemory<float>[count];
        for (int r = 0; r < count; r++)
        {
            rows[r] = buffer.AsMemory(3 + (r * Dimension), Dimension);
        }

        using ExactIndex index = Filled();
        AssertSame(index.SearchBatch(buffer.AsSpan(3, count * Dimension), 4), index.SearchBatch(rows, 4));
    }

    [Fact]
    public void A_row_of_the_wrong_length_is_named_and_nothing_is_added()
    {
        using var index = new ExactIndex(Dimension, DistanceMetric.SquaredEuclidean);
        float[][] rows = [[1, 2, 3], [4, 5, 6], [7, 8]];
        var e = Assert.Throws<ArgumentException>(() => index.AddRange([1, 2, 3], rows));
        Assert.Equal("vectors", e.ParamName);
        Assert.StartsWith("vectors[2] has 2 components; the index dimension is 3.", e.Message, StringComparison.Ordinal);
        Assert.Equal(0, index.Count);

        var m = Assert.Throws<ArgumentException>(() => index.AddRange([1, 2, 3], rows.Select(r => (ReadOnlyMemory<float>)r).ToArray()));
        Assert.StartsWith("vectors[2] has 2 components; the index dimension is 3.", m.Message, StringComparison.Ordinal);
        Assert.Equal(0, index.Count);
    }

    [Fact]
    public void A_null_row_is_named()
    {
        using ExactIndex index = Filled();
        float[][] queries = [[1, 2, 3], null!];
        var e = Assert.Throws<ArgumentException>(() => index.SearchBatch(queries, 2));
        Assert.Equal("queries", e.ParamName);
        Assert.StartsWith("queries[1] is null; every row needs 3 components.", e.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void A_query_of_the_wrong_length_is_named()
    {
        using ExactIndex index = Filled();
        ReadOnlyMemory<float>[] queries = [new float[] { 1, 2, 3 }, new float[] { 1, 2, 3, 4 }];
        var e = Assert.Throws<ArgumentException>(() => index.SearchBatch(queries, 2));
        Assert.StartsWith("queries[1] has 4 components; the index dimension is 3.", e.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void Id_and_row_counts_must_agree()
    {
        using var index = new ExactIndex(Dimension, DistanceMetric.SquaredEuclidean);
        var e = Assert.Throws<ArgumentException>(() => index.AddRange([1, 2], s_rows));
        Assert.Equal("vectors", e.ParamName);
        Assert.StartsWith("vectors has 5 rows; ids has 2. Pass one vector per id.", e.Message, StringComparison.Ordinal);
        Assert.Equal(0, index.Count);
    }

    [Fact]
    public void Non_positive_k_and_null_arguments_are_rejected()
    {
        using ExactIndex index = Filled();
        var k = Assert.Throws<ArgumentOutOfRangeException>(() => index.SearchBatch(s_rows, 0));
        Assert.Contains("k must be positive; got 0.", k.Message);
        Assert.Throws<ArgumentNullException>(() => index.SearchBatch((IReadOnlyList<float[]>)null!, 1));
        Assert.Throws<ArgumentNullException>(() => index.AddRange(s_ids, (IReadOnlyList<ReadOnlyMemory<float>>)null!));
        Assert.Throws<ArgumentNullException>(() => ((IVectorIndex)null!).SearchBatch(s_rows, 1));
    }

    [Fact]
    public void An_empty_list_searches_no_queries()
    {
        using ExactIndex index = Filled();
        BatchSearchResults results = index.SearchBatch(Array.Empty<float[]>(), 3);
        Assert.Equal(0, results.QueryCount);
    }

    private static void AssertSame(BatchSearchResults expected, BatchSearchResults actual)
    {
        Assert.Equal(expected.QueryCount, actual.QueryCount);
        Assert.Equal(expected.K, actual.K);
        for (int q = 0; q < expected.QueryCount; q++)
        {
            Assert.Equal(expected[q].ToArray(), actual[q].ToArray());
        }
    }
}
