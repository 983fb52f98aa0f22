using System.Buffers;
using System.Buffers.Binary;
using System.Runtime.InteropServices;

namespace VectorKit.IO;

/// <summary>Writes values in little-endian byte order whatever the machine's order.</summary>
internal static class LittleEndianWriter
{
    private const int ChunkValues = 1 << 14;

    public static void WriteInt32(Stream stream, int value)
    {
        Span<byte> bytes = stackalloc byte[4];
        BinaryPrimitives.WriteInt32LittleEndian(bytes, value);
        stream.Write(bytes);
    }

    public static void Write(Stream stream, ReadOnlySpan<float> values)
        => Write(stream, MemoryMarshal.Cast<float, int>(values));

    public static void Write(Stream stream, ReadOnlySpan<int> values)
    {
        if (BitConverter.IsLittleEndian)
        {
            stream.Write(MemoryMarshal.AsBytes(values));
            return;
        }

        int[] buffer = ArrayPool<int>.Shared.Rent(Math.Min(values.Length, ChunkValues));
        try
        {
            while (!values.IsEmpty)
            {
                int n = Math.Min(values.Length, buffer.Length);
                BinaryPrimitives.ReverseEndianness(values[..n], buffer.AsSpan(0, n));
                stream.Write(MemoryMarshal.AsBytes(buffer.AsSpan(0, n)));
                values = values[n..];
            }
        }
        finally
        {
            ArrayPool<int>.Shared.Return(buffer);
        }
    }

    public static void Write(Stream stream, ReadOnlySpan<long> values)
    {
        if (BitConverter.IsLittleEndian)
        {
            stream.Write(MemoryMarshal.AsBytes(values));
            return;
        }

        long[] buffer = ArrayPool<long>.Shared.Rent(Math.Min(values.Length, ChunkValues));
        try
        {
            while (!values.IsEmpty)
            {
                int n = Math.Min(values.Length, buffer.Length);
                BinaryPrimitives.ReverseEndianness(values[..n], buffer.AsSpan(0, n));
                stream.Write(MemoryMarshal.AsBytes(buffer.AsSpan(0, n)));
                values = values[n..];
            }
        }
        finally
        {
            ArrayPool<long>.Shared.Return(buffer);
        }
    }
}
