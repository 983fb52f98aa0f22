using System.Buffers.Binary;
using System.IO.Hashing;
using System.Runtime.InteropServices;

namespace VectorKit.Persistence;

/// <summary>
/// Writes the index file layout: preamble and header (one checksum over both), then each section the header lists,
/// in order: frame, zero padding to the payload alignment, payload, payload checksum. Payloads are written in large
/// blocks, each hashed while it is still in cache.
/// </summary>
internal sealed class IndexFileWriter
{
    // Large spans are hashed and written in blocks of this size: cache-sized, and a cancellation point each.
    private const int BlockBytes = 1 << 20;

    private readonly Stream _stream;
    private readonly CancellationToken _cancellationToken;
    private readonly XxHash3 _hash = new();
    private IndexHeader? _header;
    private int _nextSection;
    private SectionEntry _open;
    private bool _inSection;
    private long _sectionWritten;
    private long _position;

    private readonly Indexes.VectorIndex? _index;

    public IndexFileWriter(Stream stream, CancellationToken cancellationToken, Indexes.VectorIndex? index = null)
    {
        _stream = stream;
        _cancellationToken = cancellationToken;
        _index = index;
    }

    public void WriteHeader(IndexHeader header)
    {
        _header = header;

        // The fields every kind shares are added here, so that no codec has to remember them.
        TuningFields.Write(header, _index);
        byte[] encoded = header.Encode();
        byte[] head = new byte[FileLayout.PreambleBytes + encoded.Length + FileLayout.ChecksumBytes];
        FileLayout.WritePreamble(head, encoded.Length, FileLayout.VersionFor(header));
        encoded.CopyTo(head, FileLayout.PreambleBytes);
        ulong checksum = XxHash3.HashToUInt64(head.AsSpan(0, FileLayout.PreambleBytes + encoded.Length));
        BinaryPrimitives.WriteUInt64LittleEndian(head.AsSpan(FileLayout.PreambleBytes + encoded.Length), checksum);
        WriteRaw(head);
    }

    public void BeginSection(SectionId id)
    {
        if (_header is null || _inSection || _nextSection >= _header.Sections.Count || _header.Sections[_nextSection].Id != (uint)id)
        {
            throw new InvalidOperationException($"Section {id} written out of the order the header declares.");
        }

        _open = _header.Sections[_nextSection++];
        _inSection = true;
        _sectionWritten = 0;
        Span<byte> frame = stackalloc byte[FileLayout.SectionFrameBytes + FileLayout.PayloadAlignment];
        frame.Clear();
        BinaryPrimitives.WriteUInt32LittleEndian(frame, _open.Id);
        BinaryPrimitives.WriteUInt32LittleEndian(frame[4..], _open.Flags);
        BinaryPrimitives.WriteInt64LittleEndian(frame[8..], _open.Length);
        int padding = FileLayout.PaddingAfter(_position + FileLayout.SectionFrameBytes);
        WriteRaw(frame[..(FileLayout.SectionFrameBytes + padding)]);
        _hash.Reset();
    }

    public void Write<T>(ReadOnlySpan<T> values)
        where T : unmanaged
        => Write(MemoryMarshal.AsBytes(values));

    public void Write(ReadOnlySpan<byte> payload)
    {
        if (!_inSection || _sectionWritten + payload.Length > _open.Length)
        {
            throw new InvalidOperationException($"Section {_open.Id} receives more bytes than its declared {_open.Length}.");
        }

        while (!payload.IsEmpty)
        {
            _cancellationToken.ThrowIfCancellationRequested();
            ReadOnlySpan<byte> block = payload[..Math.Min(payload.Length, BlockBytes)];
            _hash.Append(block);
            WriteRaw(block);
            _sectionWritten += block.Length;
            payload = payload[block.Length..];
        }
    }

    public void EndSection()
    {
        if (!_inSection || _sectionWritten != _open.Length)
        {
            throw new InvalidOperationException($"Section {_open.Id} got {_sectionWritten} bytes; its header entry declares {_open.Length}.");
        }

        Span<byte> checksum = stackalloc byte[FileLayout.ChecksumBytes];
        BinaryPrimitives.WriteUInt64LittleEndian(checksum, _hash.GetCurrentHashAsUInt64());
        WriteRaw(checksum);
        _inSection = false;
    }

    /// <summary>Checks that every declared section was written; the caller flushes the stream.</summary>
    public void Finish()
    {
        if (_header is null || _inSection || _nextSection != _header.Sections.Count)
        {
            throw new InvalidOperationException("The index file was not written completely.");
        }
    }

    private void WriteRaw(ReadOnlySpan<byte> bytes)
    {
        _stream.Write(bytes);
        _position += bytes.Length;
    }
}
