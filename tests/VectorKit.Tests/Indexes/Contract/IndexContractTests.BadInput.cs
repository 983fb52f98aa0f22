using VectorKit.Distance;
using VectorKit.Indexes;

namespace VectorKit.Tests.Indexes.Contract;

/// <summary>Invalid arguments to writes throw the documented exception type and change nothing.</summary>
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
    };

    private static readonly Dictionary<string, (Type Expected, Action<IndexContractTests, IVectorIndex, long[]> Call)> BadCosineCalls = new()
    {
        ["Add, zero vector"] = (typeof(ArgumentException), (t, index, _) => t.Add(index, 1, new float[Dim])),
        ["AddRange, zero row"] = (typeof(ArgumentException), (t, index, _) => t.AddRange(index, [1, 2], [.. Filler(Dim), .. new float[Dim]])),
        ["AddOrReplace, zero vector"] = (typeof(ArgumentException), (t, index, ids) => t.AddOrReplace(index, ids[2], new float[Dim])),
        ["AddOrReplaceRange, zero row"] = (typeof(ArgumentException), (t, index, ids) => t.AddOrReplaceRange(index, [ids[2], 1], [.. new float[Dim], .. Filler(Dim)])),
    };

    public static TheoryData<string> BadInputs => [.. BadCalls.Keys];

    public static TheoryData<string> BadCosineInputs => [.. BadCosineCalls.Keys];

    [Theory]
    [MemberData(nameof(BadInputs))]
    public void BadInput_ThrowsTheDocumentedType_AndChangesNothing(string input)
        => AssertRejected(DistanceMetric.SquaredEuclidean, BadCalls[input].Expected, (index, ids) => BadCalls[input].Call(this, index, ids));

    [Theory]
    [MemberData(nameof(BadCosineInputs))]
    public void BadInput_UnderCosine_ThrowsTheDocumentedType_AndChangesNothing(string input)
        => AssertRejected(DistanceMetric.Cosine, BadCosineCalls[input].Expected, (index, ids) => BadCosineCalls[input].Call(this, index, ids));

    [Theory]
    [MemberData(nameof(BadInputs))]
    public void BadInput_UnderCosine_AsUnderOtherMetrics(string input)
        => AssertRejected(DistanceMetric.Cosine, BadCalls[input].Expected, (index, ids) => BadCalls[input].Call(this, index, ids));
}
