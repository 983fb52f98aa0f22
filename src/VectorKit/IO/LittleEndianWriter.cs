using System.Buffers.Binary;
using System.Runtime.CompilerServices;
using System.Runtime.InteropServices;
using VectorKit.Internal;

namespace VectorKit.IO;

/// <summary>Writes values in little-endian byte order whatever the machine's order.</summary>
internal static class LittleEndianWriter
{
    private const int ChunkBytes = 1 << 16;

    public static void WriteInt32(Stream stream, int value)
    {
        Span<byte> bytes = stackalloc byte[4];
        BinaryPrimitives.WriteInt32LittleEndian(bytes, value);
        stream.Write(bytes);
    }

    public static void Write(Stream stream, ReadOnlySpan<float> values) => Write<float>(stream, values);

    public static void Write(Stream stream, ReadOnlySpan<int> values) => Write<int>(stream, values);

    public static void Write(Stream stream, ReadOnlySpan<long> values) => Write<long>(stream, values);

    // On a big-endian machine each element's bytes are reversed in a pooled chunk before they are written.
    private static void Write<T>(Stream stream, ReadOnlySpan<T> values)
        where T : unmanaged
    {
        ReadOnlySpan<byte> bytes = MemoryMarshal.AsBytes(values);
        if (BitConverter.IsLittleEndian)
        {
            stream.Write(bytes);
            return;
        }

        int size = Unsafe.SizeOf<T>();
        using var chunk = ScratchRental<byte>.Rent(Math.Min(bytes.Length, ChunkBytes / size * size));
        while (!bytes.IsEmpty)
        {
            Span<byte> part = chunk.Span[..Math.Min(bytes.Length, chunk.Span.Length)];
            bytes[..part.Length].CopyTo(part);
            for (int i = 0; i < part.Length; i += size)
            {
                part.Slice(i, size).Reverse();
            }

            stream.Write(part);
            bytes = bytes[part.Length..];
        }
    }
}
