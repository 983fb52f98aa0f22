using System.Buffers.Binary;
using System.Runtime.InteropServices;

namespace VectorKit.IO;

/// <summary>
/// Converts raw element bytes from a file into float, int32 or int64 values. Byte order is always explicit: the file's
/// order is compared with <see cref="BitConverter.IsLittleEndian"/>, never assumed to match the machine.
/// </summary>
internal static class ElementConverter
{
    public static int SizeOf(ElementKind kind) => kind switch
    {
        ElementKind.UInt8 or ElementKind.Int8 => 1,
        ElementKind.Int16 => 2,
        ElementKind.Int32 or ElementKind.Float32 => 4,
        _ => 8,
    };

    public static bool IsInteger(ElementKind kind) => kind is not (ElementKind.Float32 or ElementKind.Float64);

    /// <summary>Converts <paramref name="destination"/>.Length elements; integers wider than 24 bits may round.</summary>
    public static void ToSingle(ReadOnlySpan<byte> source, ElementKind kind, bool bigEndian, Span<float> destination)
    {
        bool swap = bigEndian == BitConverter.IsLittleEndian;
        switch (kind)
        {
            case ElementKind.UInt8:
                for (int i = 0; i < destination.Length; i++)
                {
                    destination[i] = source[i];
                }

                break;
            case ElementKind.Int8:
                ReadOnlySpan<sbyte> s8 = MemoryMarshal.Cast<byte, sbyte>(source);
                for (int i = 0; i < destination.Length; i++)
                {
                    destination[i] = s8[i];
                }

                break;
            case ElementKind.Int16:
                ReadOnlySpan<short> s16 = MemoryMarshal.Cast<byte, short>(source);
                for (int i = 0; i < destination.Length; i++)
                {
                    destination[i] = swap ? BinaryPrimitives.ReverseEndianness(s16[i]) : s16[i];
                }

                break;
            case ElementKind.Int32:
                ReadOnlySpan<int> s32 = MemoryMarshal.Cast<byte, int>(source);
                for (int i = 0; i < destination.Length; i++)
                {
                    destination[i] = swap ? BinaryPrimitives.ReverseEndianness(s32[i]) : s32[i];
                }

                break;
            case ElementKind.Int64:
                ReadOnlySpan<long> s64 = MemoryMarshal.Cast<byte, long>(source);
                for (int i = 0; i < destination.Length; i++)
                {
                    destination[i] = swap ? BinaryPrimitives.ReverseEndianness(s64[i]) : s64[i];
                }

                break;
            case ElementKind.Float32:
                // Same width: copy the bit patterns, then fix the byte order in place if the file's differs.
                Span<int> bits = MemoryMarshal.Cast<float, int>(destination);
                source[..(destination.Length * 4)].CopyTo(MemoryMarshal.AsBytes(bits));
                if (swap)
                {
                    BinaryPrimitives.ReverseEndianness(bits, bits);
                }

                break;
            case ElementKind.Float64:
                ReadOnlySpan<long> f64 = MemoryMarshal.Cast<byte, long>(source);
                for (int i = 0; i < destination.Length; i++)
                {
                    long b = swap ? BinaryPrimitives.ReverseEndianness(f64[i]) : f64[i];
                    destination[i] = (float)BitConverter.Int64BitsToDouble(b);
                }

                break;
        }
    }

    /// <summary>
    /// Converts integer elements to int32. Returns -1, or the index of the first element that does not fit
    /// (possible only for <see cref="ElementKind.Int64"/>).
    /// </summary>
    public static int ToInt32(ReadOnlySpan<byte> source, ElementKind kind, bool bigEndian, Span<int> destination)
    {
        bool swap = bigEndian == BitConverter.IsLittleEndian;
        switch (kind)
        {
            case ElementKind.UInt8:
                for (int i = 0; i < destination.Length; i++)
                {
                    destination[i] = source[i];
                }

                break;
            case ElementKind.Int8:
                ReadOnlySpan<sbyte> s8 = MemoryMarshal.Cast<byte, sbyte>(source);
                for (int i = 0; i < destination.Length; i++)
                {
                    destination[i] = s8[i];
                }

                break;
            case ElementKind.Int16:
                ReadOnlySpan<short> s16 = MemoryMarshal.Cast<byte, short>(source);
                for (int i = 0; i < destination.Length; i++)
                {
                    destination[i] = swap ? BinaryPrimitives.ReverseEndianness(s16[i]) : s16[i];
                }

                break;
            case ElementKind.Int32:
                source[..(destination.Length * 4)].CopyTo(MemoryMarshal.AsBytes(destination));
                if (swap)
                {
                    BinaryPrimitives.ReverseEndianness(destination, destination);
                }

                break;
            case ElementKind.Int64:
                ReadOnlySpan<long> s64 = MemoryMarshal.Cast<byte, long>(source);
                for (int i = 0; i < destination.Length; i++)
                {
                    long v = swap ? BinaryPrimitives.ReverseEndianness(s64[i]) : s64[i];
                    if (v is < int.MinValue or > int.MaxValue)
                    {
                        return i;
                    }

                    destination[i] = (int)v;
                }

                break;
            default:
                throw new InvalidOperationException("Floating-point elements cannot be read as integers.");
        }

        return -1;
    }

    /// <summary>Converts integer elements to int64; every integer kind fits.</summary>
    public static void ToInt64(ReadOnlySpan<byte> source, ElementKind kind, bool bigEndian, Span<long> destination)
    {
        bool swap = bigEndian == BitConverter.IsLittleEndian;
        if (kind == ElementKind.Int64)
        {
            source[..(destination.Length * 8)].CopyTo(MemoryMarshal.AsBytes(destination));
            if (swap)
            {
                BinaryPrimitives.ReverseEndianness(destination, destination);
            }

            return;
        }

        // The narrower kinds go through int32, which holds each of them exactly; convert in stack-sized pieces.
        Span<int> narrow = stackalloc int[256];
        int size = SizeOf(kind);
        while (!destination.IsEmpty)
        {
            int n = Math.Min(destination.Length, narrow.Length);
            ToInt32(source[..(n * size)], kind, bigEndian, narrow[..n]);
            for (int i = 0; i < n; i++)
            {
                destination[i] = narrow[i];
            }

            source = source[(n * size)..];
            destination = destination[n..];
        }
    }
}
