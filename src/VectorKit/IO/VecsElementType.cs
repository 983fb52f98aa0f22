namespace VectorKit.IO;

/// <summary>The element type of a vecs file: each row is a little-endian int32 dimension d followed by d elements.</summary>
public enum VecsElementType
{
    /// <summary>.fvecs: little-endian float32 elements.</summary>
    Float32,

    /// <summary>.ivecs: little-endian int32 elements (typically neighbour ids).</summary>
    Int32,

    /// <summary>.bvecs: unsigned byte elements.</summary>
    UInt8,
}
