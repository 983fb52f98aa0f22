namespace VectorKit.IO;

/// <summary>The element encodings the readers understand; byte order is carried separately.</summary>
internal enum ElementKind
{
    UInt8,
    Int8,
    Int16,
    Int32,
    Int64,
    Float32,
    Float64,
}
