using VectorKit.Distance;
using VectorKit.Indexes;

namespace VectorKit.Tests.Indexes.Contract;

/// <summary>After Dispose every member but Dimension, Metric and Options throws ObjectDisposedException.</summary>
public abstract partial class IndexContractTests
{
    private static readonly Dictionary<string, Action<IVectorIndex, float[]>> DisposedCalls = new()
    {
        ["Count"] = (index, _) => GC.KeepAlive(index.Count),
        ["MemoryBytes"] = (index, _) => GC.KeepAlive(index.MemoryBytes),
        ["Contains"] = (index, _) => index.Contains(1),
        ["TryGetVector"] = (index, _) => index.TryGetVector(1, new float[index.Dimension]),
        ["GetIds"] = (index, _) => index.GetIds(),
        ["Add"] = (index, vector) => index.Add(-77, vector),
        ["AddRange"] = (index, vector) => index.AddRange([-77], vector),
        ["AddOrReplace"] = (index, vector) => index.AddOrReplace(-77, vector),
        ["AddOrReplaceRange"] = (index, vector) => index.AddOrReplaceRange([-77], vector),
        ["Remove"] = (index, _) => index.Remove(ContractData.Ids(1)[0]),
        ["RemoveRange"] = (index, _) => index.RemoveRange([ContractData.Ids(1)[0]]),
        ["Compact"] = (index, _) => index.Compact(),
        ["Search"] = (index, vector) => index.Search(vector, new SearchHit[K]),
        ["SearchBatch"] = (index, vector) => index.SearchBatch(vector, K),
    };

    public static TheoryData<string> DisposedMembers => [.. DisposedCalls.Keys];

    [Theory]
    [MemberData(nameof(DisposedMembers))]
    public void Dispose_ThenTheMemberThrowsObjectDisposed(string member)
    {
        using Filled filled = Fill(DistanceMetric.SquaredEuclidean, 50);
        float[] vector = Row(Queries(1), 0);
        filled.Index.Dispose();
        Assert.Throws<ObjectDisposedException>(() => DisposedCalls[member](filled.Index, vector));
    }

    [Fact]
    public void Dispose_LeavesDimensionMetricAndOptions_AndMayBeRepeated()
    {
        IVectorIndex index = Create(Dim, DistanceMetric.Cosine);
        VectorIndexOptions? options = GivenOptions;
        AddRange(index, ContractData.Ids(20), ContractData.Rows(20, Dim, 2));
        index.Dispose();
        index.Dispose();
        Assert.Equal((Dim, DistanceMetric.Cosine), (index.Dimension, index.Metric));
        Assert.Same(options, index.Options);
    }
}
