namespace VectorKit.Indexes.InvertedFile;

/// <summary>How an <see cref="InvertedFileIndex"/> stores the vectors in its lists, which is what a search reads.</summary>
public enum ListStorage
{
    /// <summary>The float32 vectors themselves (4 bytes per component): exact distances within the probed lists.</summary>
    Float32 = 0,

    /// <summary>
    /// Product-quantization codes of each vector's residual from its list's centroid
    /// (<see cref="InvertedFileOptions.ProductCodeBytes"/> bytes per vector); distances by table look-up (ADC).
    /// </summary>
    ProductCodes = 1,

    /// <summary>One byte per component: the residual from the list's centroid, scalar-quantized with trained per-component ranges.</summary>
    Scalar8Bit = 2,
}
