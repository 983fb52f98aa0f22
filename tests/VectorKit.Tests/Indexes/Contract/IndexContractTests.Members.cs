using VectorKit.Distance;
using VectorKit.Indexes;

namespace VectorKit.Tests.Indexes.Contract;

/// <summary>MemoryBytes as items are added.</summary>
public abstract partial class IndexContractTests
{
    [Fact]
    public void MemoryBytes_GrowsWithTheItems()
    {
        using IVectorIndex index = Create(Dim, DistanceMetric.SquaredEuclidean);
        long before = index.MemoryBytes;
        AddRange(index, ContractData.Ids(50), ContractData.Rows(50, Dim, 3));
        long after50 = index.MemoryBytes;
        AddRange(index, ContractData.Ids(1000, offset: 1), ContractData.Rows(1000, Dim, 4));
        long after1050 = index.MemoryBytes;
        Assert.True(before < after50 && after50 < after1050, $"{before} → {after50} → {after1050} bytes");
    }
}
