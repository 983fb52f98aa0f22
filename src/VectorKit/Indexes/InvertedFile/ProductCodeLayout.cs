namespace VectorKit.Indexes.InvertedFile;

/// <summary>How the inverted file stores and scans product codes (<see cref="VectorEncoding.ProductCodes"/>).</summary>
public enum ProductCodeLayout
{
    /// <summary>
    /// 256 codewords per sub-space, one code byte each, scanned by float table look-ups (ADC): the closest distances
    /// per byte of code.
    /// </summary>
    BytePerSubspace = 0,

    /// <summary>
    /// 16 codewords per sub-space, two sub-spaces per code byte (so twice as many sub-spaces as
    /// <see cref="InvertedFileOptions.ProductCodeBytes"/>, which must divide the dimension), codes transposed in blocks
    /// of 32 and scanned with in-register byte shuffles over lookup tables quantised to 8 bits (the product-quantization
    /// fast scan). Scans are several times faster; the scan's distances are estimates (each sub-space's table entry is
    /// off by at most half a quantisation step), so this layout is meant to be used with re-scoring
    /// (<see cref="VectorIndexOptions.RescoreDepth"/>), which replaces them with exact distances.
    /// </summary>
    FourBitFastScan = 1,
}
