namespace VectorKit.Indexes;

/// <summary>How an index holds the vectors its search reads: the in-memory layout of every index kind.</summary>
public enum VectorEncoding
{
    /// <summary>Full float32 vectors: exact distances, 4 bytes per component, no training.</summary>
    Float32 = 0,

    /// <summary>
    /// One byte per component, from ranges learnt by <see cref="ITrainableIndex.Train"/> (see
    /// <see cref="Quantization.ScalarQuantizer"/>): a quarter of the memory, distances to the decoded codes. The
    /// inverted-file index encodes each vector's residual from its list's centroid.
    /// </summary>
    Scalar8Bit = 1,

    /// <summary>
    /// Product-quantization codes of each vector's residual from its list's centroid, distances by table look-up (ADC).
    /// Only the inverted-file index offers it, in two layouts (its option <c>ProductCodeLayout</c>).
    /// </summary>
    ProductCodes = 2,
}
