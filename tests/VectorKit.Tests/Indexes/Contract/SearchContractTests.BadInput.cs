using VectorKit.Distance;
using VectorKit.Indexes;

namespace VectorKit.Tests.Indexes.Contract;

/// <summary>Invalid arguments to reads throw the documented exception type and change nothing.</summary>
public abstract partial class SearchContractTests
{
    private static readonly Dictionary<string, (Type Expected, Action<IVectorIndex, long[]> Call)> BadReads = new()
    {
        ["Search, wrong dimension"] = (typeof(ArgumentException), (index, _) => index.Search(Filler(Dim - 1), new SearchHit[K])),
        ["Search, NaN"] = (typeof(ArgumentException), (index, _) => index.Search(Filler(Dim, float.NaN), new SearchHit[K])),
        ["Search, infinity"] = (typeof(ArgumentException), (index, _) => index.Search(Filler(Dim, float.PositiveInfinity), new SearchHit[K])),
        ["Search, empty destination"] = (typeof(ArgumentException), (index, _) => index.Search(Filler(Dim), Span<SearchHit>.Empty)),
        ["TryGetVector, short destination"] = (typeof(ArgumentException), (index, ids) => index.TryGetVector(ids[0], new float[Dim - 1])),
        ["TryGetVector, empty destination"] = (typeof(ArgumentException), (index, ids) => index.TryGetVector(ids[0], [])),
        ["SearchBatch, k is 0"] = (typeof(ArgumentOutOfRangeException), (index, _) => index.SearchBatch(Filler(Dim), 0)),
        ["SearchBatch, k is negative"] = (typeof(ArgumentOutOfRangeException), (index, _) => index.SearchBatch(Filler(Dim * 2), -3)),
        ["SearchBatch, ragged queries"] = (typeof(ArgumentException), (index, _) => index.SearchBatch(Filler((Dim * 2) + 1), K)),
        ["SearchBatch, NaN"] = (typeof(ArgumentException), (index, _) => index.SearchBatch(Filler(Dim * 2, float.NaN, at: Dim + 1), K)),
    };

    private static readonly Dictionary<string, (Type Expected, Action<IVectorIndex, long[]> Call)> BadCosineReads = new()
    {
        ["Search, zero query"] = (typeof(ArgumentException), (index, _) => index.Search(new float[Dim], new SearchHit[K])),
        ["SearchBatch, zero query"] = (typeof(ArgumentException), (index, _) => index.SearchBatch([.. Filler(Dim), .. new float[Dim]], K)),
    };

    public static TheoryData<string> BadReadInputs => [.. BadReads.Keys];

    public static TheoryData<string> BadCosineReadInputs => [.. BadCosineReads.Keys];

    [Theory]
    [MemberData(nameof(BadReadInputs))]
    public void BadReadInput_ThrowsTheDocumentedType_AndChangesNothing(string input)
        => AssertRejected(DistanceMetric.SquaredEuclidean, BadReads[input].Expected, BadReads[input].Call);

    [Theory]
    [MemberData(nameof(BadCosineReadInputs))]
    public void BadReadInput_UnderCosine_ThrowsTheDocumentedType_AndChangesNothing(string input)
        => AssertRejected(DistanceMetric.Cosine, BadCosineReads[input].Expected, BadCosineReads[input].Call);

    [Theory]
    [MemberData(nameof(BadReadInputs))]
    public void BadReadInput_UnderCosine_AsUnderOtherMetrics(string input)
        => AssertRejected(DistanceMetric.Cosine, BadReads[input].Expected, BadReads[input].Call);

    private protected void AssertRejected(DistanceMetric metric, Type expected, Action<IVectorIndex, long[]> call)
    {
        using Filled filled = Fill(metric, 120);
        float[] queries = Queries(3);
        string before = Snapshot(filled.Index, queries);
        Exception thrown = Assert.ThrowsAny<Exception>(() => call(filled.Index, filled.Ids));
        Assert.True(expected.IsInstanceOfType(thrown), $"expected {expected.Name}, got {thrown.GetType().Name}: {thrown.Message}");
        if (thrown is ArgumentException argument)
        {
            // The project's rule: argument exceptions name the parameter.
            Assert.False(string.IsNullOrEmpty(argument.ParamName), $"{thrown.GetType().Name} names no parameter: {thrown.Message}");
        }

        Assert.Equal(before, Snapshot(filled.Index, queries));
    }

    // A valid-looking row (inside the data's range) with one bad component when `bad` is given.
    private protected static float[] Filler(int length, float bad = 0f, int at = 0)
    {
        float[] values = ContractData.Rows(1, length, 3);
        if (bad != 0f || float.IsNaN(bad))
        {
            values[at] = bad;
        }

        return values;
    }
}
