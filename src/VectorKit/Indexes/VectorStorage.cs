namespace VectorKit.Indexes;

/// <summary>How an exact or graph index stores its vectors.</summary>
public enum VectorStorage
{
    /// <summary>Full float32 vectors: exact distances, 4 bytes per component, no training.</summary>
    Float32 = 0,

    /// <summary>
    /// One byte per component, from ranges learnt by <see cref="ITrainableIndex.Train"/> (see
    /// <see cref="Quantization.ScalarQuantizer"/>): a quarter of the memory, distances to the decoded codes; with a
    /// positive re-score depth the full vectors are kept as well and the best candidates re-scored exactly.
    /// </summary>
    Scalar8Bit = 1,
}
