using VectorKit.Indexes;
using VectorKit.Indexes.InvertedFile;

namespace VectorKit.Tests.Indexes.Contract;

/// <summary>Inverted-file options of the contract variants: 16 lists (4 probed by default), short training, two threads.</summary>
internal static class ContractInvertedFileOptions
{
    public const int Lists = 16;

    public static InvertedFileOptions For(VectorEncoding encoding, int dimension, int rescoreDepth = 0, FullVectorLocation fullVectors = FullVectorLocation.InIndexMemory, ProductCodeLayout layout = ProductCodeLayout.BytePerSubspace) => new()
    {
        ListCount = Lists,
        SearchWidth = 4,
        MaxIterations = 8,
        Seed = 3,
        MaxDegreeOfParallelism = 2,
        Encoding = encoding,

        // Half a byte per component: two components per 8-bit sub-space, or one per four-bit sub-space.
        ProductCodeBytes = dimension / 2,
        ProductCodeLayout = layout,
        RescoreDepth = rescoreDepth,
        FullVectors = fullVectors,
    };
}
