namespace VectorKit.VectorData;

/// <summary>
/// Index kinds this connector offers beyond the abstraction's own <see cref="Microsoft.Extensions.VectorData.IndexKind"/>
/// names; set one as a vector property's index kind like any other.
/// </summary>
/// <remarks>
/// The abstraction's names map as follows: <c>Flat</c> (the default) to VectorKit's exact index; <c>Hnsw</c> to the
/// graph index; <c>IvfFlat</c> to the inverted-file index with float32 lists; <c>QuantizedFlat</c> to the exact index
/// under 8-bit codes with exact re-scoring; <c>Dynamic</c> to an exact index that becomes a graph index once the
/// collection holds <see cref="VectorKitStoreOptions.TrainingThreshold"/> vectors. The abstraction's disk-based kind is not offered (VectorKit keeps indexes in memory).
/// </remarks>
public static class VectorKitIndexKind
{
    /// <summary>The inverted-file index with 8-bit scalar codes in its lists and exact re-scoring from full vectors.</summary>
    public const string InvertedFileScalar8Bit = "InvertedFileScalar8Bit";

    /// <summary>
    /// The inverted-file index with product-quantization codes in its lists and exact re-scoring from full vectors. The
    /// code size is the largest of 64, 32, 16, 8, 4, 2 and 1 bytes that divides the dimension.
    /// </summary>
    public const string InvertedFileProductCodes = "InvertedFileProductCodes";
}
