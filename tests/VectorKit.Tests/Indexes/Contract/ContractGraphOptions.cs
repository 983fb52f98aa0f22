using VectorKit.Indexes;
using VectorKit.Indexes.Graph;

namespace VectorKit.Tests.Indexes.Contract;

/// <summary>Graph options of the contract variants: small lists and beams (small data), two linking threads.</summary>
internal static class ContractGraphOptions
{
    public static GraphIndexOptions Float32 => new() { LinksPerNode = 8, BuildWidth = 64, SearchWidth = 32, Seed = 5, MaxDegreeOfParallelism = 2 };

    public static GraphIndexOptions Scalar(int rescoreDepth, FullVectorLocation fullVectors = FullVectorLocation.InIndexMemory) => new()
    {
        LinksPerNode = 8,
        BuildWidth = 64,
        SearchWidth = 32,
        Seed = 5,
        MaxDegreeOfParallelism = 2,
        Encoding = VectorEncoding.Scalar8Bit,
        RescoreDepth = rescoreDepth,
        FullVectors = fullVectors,
    };
}
