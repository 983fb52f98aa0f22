namespace VectorKit.IO;

/// <summary>The element type codes of the MNIST idx format (the third magic byte); data is big-endian.</summary>
public enum IdxDataType
{
    /// <summary>0x08: unsigned byte.</summary>
    UInt8 = 0x08,

    /// <summary>0x09: signed byte.</summary>
    Int8 = 0x09,

    /// <summary>0x0B: big-endian int16.</summary>
    Int16 = 0x0B,

    /// <summary>0x0C: big-endian int32.</summary>
    Int32 = 0x0C,

    /// <summary>0x0D: big-endian float32.</summary>
    Float32 = 0x0D,

    /// <summary>0x0E: big-endian float64.</summary>
    Float64 = 0x0E,
}
