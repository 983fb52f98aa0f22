using System.Buffers.Binary;

namespace VectorKit.VectorData;

/// <summary>
/// Reads a collection file held in memory. Every count is checked against the bytes that remain before anything is
/// allocated for it, so a hostile length cannot make the reader allocate more than the file's own size.
/// </summary>
internal ref struct FileCursor
{
    private readonly ReadOnlySpan<byte> _data;
    private int _position;

    public FileCursor(ReadOnlySpan<byte> data, int maxStringBytes)
    {
        _data = data;
        MaxStringBytes = maxStringBytes;
    }

    public readonly int MaxStringBytes { get; }

    public readonly int Position => _position;

    public readonly int Remaining => _data.Length - _position;

    public ReadOnlySpan<byte> Bytes(int count)
    {
        if (count < 0 || count > Remaining)
        {
            throw new CollectionFileException($"needs {count} bytes at offset {_position}, {Remaining} left");
        }

        ReadOnlySpan<byte> result = _data.Slice(_position, count);
        _position += count;
        return result;
    }

    public byte Byte() => Bytes(1)[0];

    public int Int32() => BinaryPrimitives.ReadInt32LittleEndian(Bytes(4));

    public long Int64() => BinaryPrimitives.ReadInt64LittleEndian(Bytes(8));

    /// <summary>A count of items that take at least <paramref name="minBytesEach"/> bytes each; checked against what is left.</summary>
    public int Count(int minBytesEach)
    {
        int count = Int32();
        if (count < 0 || (long)count * minBytesEach > Remaining)
        {
            throw new CollectionFileException($"count {count} at offset {_position - 4} exceeds the {Remaining} bytes left");
        }

        return count;
    }

    /// <summary>A string as <see cref="BinaryWriter.Write(string)"/> writes it: a 7-bit encoded byte length, then UTF-8.</summary>
    public string String()
    {
        int length = 0;
        for (int shift = 0; ; shift += 7)
        {
            if (shift > 28)
            {
                throw new CollectionFileException($"string length at offset {_position} is malformed");
            }

            byte b = Byte();
            length |= (b & 0x7F) << shift;
            if ((b & 0x80) == 0)
            {
                break;
            }
        }

        if (length < 0 || length > MaxStringBytes)
        {
            throw new CollectionFileException($"a string of {length} bytes exceeds the limit of {MaxStringBytes}");
        }

        return ValueCodec.DecodeUtf8(Bytes(length));
    }
}
