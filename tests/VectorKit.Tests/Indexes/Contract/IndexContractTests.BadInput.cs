using VectorKit.Distance;
using VectorKit.Indexes;

namespace VectorKit.Tests.Indexes.Contract;

/// <summary>Invalid arguments throw the documented exception type and change nothing.</summary>
public abstract partial class IndexContractTests
{
    private static readonly Dictionary<string, (Type Expected, Action<IndexContractTests, IVectorIndex, long[]> Call)> BadCalls = new()
    {
        ["Add, dimension too small"] = (typeof(ArgumentException), (t, index, _) => t.Add(index, 1, new float[Dim - 1])),
        ["Add, dimension too large"] = (typeof(ArgumentException), (t, index, _) => t.Add(index, 1, Filler(Dim + 1))),
        ["Add, NaN"] = (typeof(ArgumentException), (t, index, _) => t.Add(index, 1, Filler(Dim, float.NaN))),
        ["Add, infinity"] = (typeof(ArgumentException), (t, index, _) => t.Add(index, 1, Filler(Dim, float.NegativeInfinity))),
        ["Add, existing id"] = (typeof(ArgumentException), (t, index, ids) => t.Add(index, ids[5], Filler(Dim))),
        ["AddRange, rows disagree with ids"] = (typeof(ArgumentException), (t, index, _) => t.AddRange(index, [1, 2], Filler(Dim * 3))),
        ["AddRange, ragged row"] = (typeof(ArgumentException), (t, index, _) => t.AddRange(index, [1, 2], Filler((Dim * 2) - 1))),
        ["AddRange, NaN in the last row"] = (typeof(ArgumentException), (t, index, _) => t.AddRange(index, [1, 2, 3], Filler(Dim * 3, float.NaN, at: (Dim * 3) - 1))),
        ["AddRange, infinity"] = (typeof(ArgumentException), (t, index, _) => t.AddRange(index, [1, 2], Filler(Dim * 2, float.PositiveInfinity, at: Dim))),
        ["AddRange, existing id"] = (typeof(ArgumentException), (t, index, ids) => t.AddRange(index, [1, ids[7], 2], Filler(Dim * 3))),
        ["AddRange, id repeated in the batch"] = (typeof(ArgumentException), (t, index, _) => t.AddRange(index, [1, 2, 1], Filler(Dim * 3))),
        ["AddOrReplace, NaN"] = (typeof(ArgumentException), (t, index, ids) => t.AddOrReplace(index, ids[3], Filler(Dim, float.NaN))),
        ["AddOrReplace, wrong dimension"] = (typeof(ArgumentException), (t, index, ids) => t.AddOrReplace(index, ids[3], Filler(Dim + 1))),
        ["AddOrReplaceRange, id repeated"] = (typeof(ArgumentException), (t, index, ids) => t.AddOrReplaceRange(index, [ids[3], 1, ids[3]], Filler(Dim * 3))),
        ["AddOrReplaceRange, infinity"] = (typeof(ArgumentException), (t, index, ids) => t.AddOrReplaceRange(index, [ids[3], 1], Filler(Dim * 2, float.PositiveInfinity, at: Dim + 2))),
        ["Remove, missing id"] = (typeof(KeyNotFoundException), (_, index, _) => index.Remove(31337)),
        ["Search, wrong dimension"] = (typeof(ArgumentException), (_, index, _) => index.Search(Filler(Dim - 1), new SearchHit[K])),
        ["Search, NaN"] = (typeof(ArgumentException), (_, index, _) => index.Search(Filler(Dim, float.NaN), new SearchHit[K])),
        ["Search, infinity"] = (typeof(ArgumentException), (_, index, _) => index.Search(Filler(Dim, float.PositiveInfinity), new SearchHit[K])),
        ["Search, empty destination"] = (typeof(ArgumentException), (_, index, _) => index.Search(Filler(Dim), Span<SearchHit>.Empty)),
        ["TryGetVector, short destination"] = (typeof(ArgumentException), (_, index, ids) => index.TryGetVector(ids[0], new float[Dim - 1])),
        ["TryGetVector, empty destination"] = (typeof(ArgumentException), (_, index, ids) => index.TryGetVector(ids[0], [])),
        ["SearchBatch, k is 0"] = (typeof(ArgumentOutOfRangeException), (_, index, _) => index.SearchBatch(Filler(Dim), 0)),
        ["SearchBatch, k is negative"] = (typeof(ArgumentOutOfRangeException), (_, index, _) => index.SearchBatch(Filler(Dim * 2), -3)),
        ["SearchBatch, ragged queries"] = (typeof(ArgumentException), (_, index, _) => index.SearchBatch(Filler((Dim * 2) + 1), K)),
        ["SearchBatch, NaN"] = (typeof(ArgumentException), (_, index, _) => index.SearchBatch(Filler(Dim * 2, float.NaN, at: Dim + 1), K)),
    };

    private static readonly Dictionary<string, (Type Expected, Action<IndexContractTests, IVectorIndex, long[]> Call)> BadCosineCalls = new()
    {
        ["Add, zero vector"] = (typeof(ArgumentException), (t, index, _) => t.Add(index, 1, new float[Dim])),
        ["AddRange, zero row"] = (typeof(ArgumentException), (t, index, _) => t.AddRange(index, [1, 2], [.. Filler(Dim), .. new float[Dim]])),
        ["AddOrReplace, zero vector"] = (typeof(ArgumentException), (t, index, ids) => t.AddOrReplace(index, ids[2], new float[Dim])),
        ["AddOrReplaceRange, zero row"] = (typeof(ArgumentException), (t, index, ids) => t.AddOrReplaceRange(index, [ids[2], 1], [.. new float[Dim], .. Filler(Dim)])),
        ["Search, zero query"] = (typeof(ArgumentException), (_, index, _) => index.Search(new float[Dim], new SearchHit[K])),
        ["SearchBatch, zero query"] = (typeof(ArgumentException), (_, index, _) => index.SearchBatch([.. Filler(Dim), .. new float[Dim]], K)),
    };

    public static TheoryData<string> BadInputs => [.. BadCalls.Keys];

    public static TheoryData<string> BadCosineInputs => [.. BadCosineCalls.Keys];

    [Theory]
    [MemberData(nameof(BadInputs))]
    public void BadInput_ThrowsTheDocumentedType_AndChangesNothing(string input)
        => AssertRejected(DistanceMetric.SquaredEuclidean, BadCalls[input]);

    [Theory]
    [MemberData(nameof(BadCosineInputs))]
    public void BadInput_UnderCosine_ThrowsTheDocumentedType_AndChangesNothing(string input)
        => AssertRejected(DistanceMetric.Cosine, BadCosineCalls[input]);

    [Theory]
    [MemberData(nameof(BadInputs))]
    public void BadInput_UnderCosine_AsUnderOtherMetrics(string input)
        => AssertRejected(DistanceMetric.Cosine, BadCalls[input]);

    private void AssertRejected(DistanceMetric metric, (Type Expected, Action<IndexContractTests, IVectorIndex, long[]> Call) bad)
    {
        using Filled filled = Fill(metric, 120);
        float[] queries = Queries(3);
        string before = Snapshot(filled.Index, queries);
        Exception thrown = Assert.ThrowsAny<Exception>(() => bad.Call(this, filled.Index, filled.Ids));
        Assert.True(bad.Expected.IsInstanceOfType(thrown), $"expected {bad.Expected.Name}, got {thrown.GetType().Name}: {thrown.Message}");
        if (thrown is ArgumentException argument)
        {
            // The project's rule: argument exceptions name the parameter.
            Assert.False(string.IsNullOrEmpty(argument.ParamName), $"{thrown.GetType().Name} names no parameter: {thrown.Message}");
        }

        Assert.Equal(before, Snapshot(filled.Index, queries));
    }

    // A valid-looking row (inside the data's range) with one bad component when `bad` is given.
    private static float[] Filler(int length, float bad = 0f, int at = 0)
    {
        float[] values = ContractData.Rows(1, length, 3);
        if (bad != 0f || float.IsNaN(bad))
        {
            values[at] = bad;
        }

        return values;
    }
}
