using VectorKit.Distance;
using VectorKit.Indexes;

namespace VectorKit.Tests.Indexes.Contract;

/// <summary>After Dispose every member but Dimension, Metric and Options throws ObjectDisposedException.</summary>
public abstract partial class SearchContractTests
{
    private static readonly Dictionary<string, Action<IVectorIndex, float[]>> DisposedCalls = new()
    {
        ["Count"] = (index, _) => GC.KeepAlive(index.Count),
        ["MemoryBytes"] = (index, _) => GC.KeepAlive(index.MemoryBytes),
        ["Contains"] = (index, _) => index.Contains(1),
        ["TryGetVector"] = (index, _) => index.TryGetVector(1, new float[index.Dimension]),
        ["GetIds"] = (index, _) => index.GetIds(),
        ["Search"] = (index, vector) => index.Search(vector, new SearchHit[K]),
        ["SearchBatch"] = (index, vector) => index.SearchBatch(vector, K),
    };

    public static TheoryData<string> DisposedMembers => [.. DisposedCalls.Keys];

    [Theory]
    [MemberData(nameof(DisposedMembers))]
    public void Dispose_ThenTheMemberThrowsObjectDisposed(string member) => AssertThrowsOnceDisposed(DisposedCalls[member]);

    /// <summary>Fills an index, disposes it, and checks that <paramref name="call"/> then throws <see cref="ObjectDisposedException"/>.</summary>
    private protected void AssertThrowsOnceDisposed(Action<IVectorIndex, float[]> call)
    {
        using Filled filled = Fill(DistanceMetric.SquaredEuclidean, 50);
        float[] vector = Row(Queries(1), 0);
        filled.Index.Dispose();
        Assert.Throws<ObjectDisposedException>(() => call(filled.Index, vector));
    }

    [Fact]
    public void Dispose_LeavesDimensionMetricAndOptions_AndMayBeRepeated()
    {
        IVectorIndex index = Fill(DistanceMetric.Cosine, 20).Index;
        index.Dispose();
        index.Dispose();
        Assert.Equal((Dim, DistanceMetric.Cosine), (index.Dimension, index.Metric));
        AssertOptions(index);
    }
}
