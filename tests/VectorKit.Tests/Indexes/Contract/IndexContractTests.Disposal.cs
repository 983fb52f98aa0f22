using VectorKit.Indexes;

namespace VectorKit.Tests.Indexes.Contract;

/// <summary>After Dispose every write throws ObjectDisposedException too.</summary>
public abstract partial class IndexContractTests
{
    private static readonly Dictionary<string, Action<IVectorIndex, float[]>> DisposedWrites = new()
    {
        ["Add"] = (index, vector) => index.Add(-77, vector),
        ["AddRange"] = (index, vector) => index.AddRange([-77], vector),
        ["AddOrReplace"] = (index, vector) => index.AddOrReplace(-77, vector),
        ["AddOrReplaceRange"] = (index, vector) => index.AddOrReplaceRange([-77], vector),
        ["Remove"] = (index, _) => index.Remove(ContractData.Ids(1)[0]),
        ["RemoveRange"] = (index, _) => index.RemoveRange([ContractData.Ids(1)[0]]),
        ["Compact"] = (index, _) => index.Compact(),
    };

    public static TheoryData<string> DisposedWriteMembers => [.. DisposedWrites.Keys];

    [Theory]
    [MemberData(nameof(DisposedWriteMembers))]
    public void Dispose_ThenTheWriteThrowsObjectDisposed(string member) => AssertThrowsOnceDisposed(DisposedWrites[member]);
}
