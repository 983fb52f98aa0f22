using System.Buffers.Binary;
using System.IO.Hashing;
using System.Runtime.InteropServices;

namespace VectorKit.Orleans;

/// <summary>
/// The write-ahead log's record layout, little-endian: magic <c>"VKWL"</c> (4 bytes), total record length (int32,
/// magic to checksum inclusive), sequence (int64), kind (1 byte), item count n (int32), dimension d (int32), n ids
/// (int64 each), n·d floats (upserts only), CRC-32 of every byte before it (4 bytes).
/// </summary>
/// <remarks>
/// A record that runs past the end of the log is a torn append (the process died before its flush, so it was never
/// acknowledged) and ends the log; a complete record with a wrong checksum or layout is damage and fails the read.
/// </remarks>
internal static class WriteLogCodec
{
    private const uint Magic = 0x4C574B56; // "VKWL" read as a little-endian uint32
    private const int HeaderBytes = 4 + 4 + 8 + 1 + 4 + 4;

    public static byte[] Encode(WriteRecord record, int dimension)
    {
        int n = record.Ids.Length;
        int floats = record.Kind == WriteKind.Upsert ? checked(n * dimension) : 0;
        int length = checked(HeaderBytes + (n * sizeof(long)) + (floats * sizeof(float)) + sizeof(uint));
        var bytes = new byte[length];
        Span<byte> s = bytes;
        BinaryPrimitives.WriteUInt32LittleEndian(s, Magic);
        BinaryPrimitives.WriteInt32LittleEndian(s[4..], length);
        BinaryPrimitives.WriteInt64LittleEndian(s[8..], record.Sequence);
        s[16] = (byte)record.Kind;
        BinaryPrimitives.WriteInt32LittleEndian(s[17..], n);
        BinaryPrimitives.WriteInt32LittleEndian(s[21..], dimension);
        int at = HeaderBytes;
        for (int i = 0; i < n; i++, at += 8)
        {
            BinaryPrimitives.WriteInt64LittleEndian(s[at..], record.Ids[i]);
        }

        for (int i = 0; i < floats; i++, at += 4)
        {
            BinaryPrimitives.WriteSingleLittleEndian(s[at..], record.Vectors[i]);
        }

        BinaryPrimitives.WriteUInt32LittleEndian(s[at..], Crc32.HashToUInt32(s[..at]));
        return bytes;
    }

    /// <summary>Decodes a whole log.</summary>
    /// <returns>The records in order, and the byte length of the valid prefix (shorter than the log after a torn append).</returns>
    /// <exception cref="InvalidDataException">A complete record is damaged, or the sequence numbers are not consecutive.</exception>
    public static (List<WriteRecord> Records, int ValidBytes) Decode(ReadOnlySpan<byte> log, int dimension)
    {
        var records = new List<WriteRecord>();
        int at = 0;
        while (at < log.Length)
        {
            ReadOnlySpan<byte> rest = log[at..];
            if (rest.Length < 8)
            {
                break; // torn header
            }

            int length = BinaryPrimitives.ReadInt32LittleEndian(rest[4..]);
            if (BinaryPrimitives.ReadUInt32LittleEndian(rest) != Magic || length < HeaderBytes + 4)
            {
                // A zero-filled or partly written tail after a crash; anything complete with a bad header is damage.
                if (IsTornTail(rest))
                {
                    break;
                }

                throw new InvalidDataException($"Write-ahead log damaged at byte {at}: bad record header.");
            }

            if (length > rest.Length)
            {
                break; // torn record
            }

            ReadOnlySpan<byte> r = rest[..length];
            uint stored = BinaryPrimitives.ReadUInt32LittleEndian(r[^4..]);
            if (Crc32.HashToUInt32(r[..^4]) != stored)
            {
                if (at + length == log.Length && IsTornTail(r[HeaderBytes..]))
                {
                    break; // the last record's payload never reached the disk
                }

                throw new InvalidDataException($"Write-ahead log damaged at byte {at}: checksum mismatch in a record of {length} bytes.");
            }

            long sequence = BinaryPrimitives.ReadInt64LittleEndian(r[8..]);
            var kind = (WriteKind)r[16];
            int n = BinaryPrimitives.ReadInt32LittleEndian(r[17..]);
            int d = BinaryPrimitives.ReadInt32LittleEndian(r[21..]);
            int floats = kind == WriteKind.Upsert ? n * d : 0;
            if (kind is not (WriteKind.Upsert or WriteKind.Remove) || n < 0 || d != dimension
                || (long)HeaderBytes + (n * 8L) + (floats * 4L) + 4 != length)
            {
                throw new InvalidDataException($"Write-ahead log damaged at byte {at}: record layout (kind {kind}, {n} items, dimension {d}) does not match its length {length} or the collection's dimension {dimension}.");
            }

            if (records.Count > 0 && sequence != records[^1].Sequence + 1)
            {
                throw new InvalidDataException($"Write-ahead log damaged at byte {at}: sequence {sequence} follows {records[^1].Sequence}.");
            }

            long[] ids = MemoryMarshal.Cast<byte, long>(r.Slice(HeaderBytes, n * 8)).ToArray();
            float[] vectors = MemoryMarshal.Cast<byte, float>(r.Slice(HeaderBytes + (n * 8), floats * 4)).ToArray();
            if (!BitConverter.IsLittleEndian)
            {
                throw new PlatformNotSupportedException("The write-ahead log reader expects a little-endian machine.");
            }

            records.Add(new WriteRecord(sequence, kind, ids, vectors));
            at += length;
        }

        return (records, at);
    }

    private static bool IsTornTail(ReadOnlySpan<byte> rest) => rest.IndexOfAnyExcept((byte)0) < 0 || rest.Length < HeaderBytes;
}
