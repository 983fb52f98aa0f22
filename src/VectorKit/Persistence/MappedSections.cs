using System.Buffers.Binary;
using System.IO.Hashing;

namespace VectorKit.Persistence;

/// <summary>
/// Where each section's payload lies in a mapped file, found from the header alone and checked against the file:
/// every offset is computed with checked arithmetic from the header's lengths (none is read from the file), every
/// frame must repeat its header entry, padding must be zero, and the last section must end where the file ends.
/// Payload checksums are verified only on request (<see cref="VerifyChecksum"/>), since that reads the whole payload.
/// </summary>
internal sealed unsafe class MappedSections
{
    // Checksums over payloads longer than a span are appended in blocks of this size.
    private const int BlockBytes = 1 << 20;

    private readonly MappedFileView _view;
    private readonly List<(SectionEntry Entry, long Offset)> _payloads = [];

    public MappedSections(MappedFileView view, IndexHeader header, long headerEnd)
    {
        _view = view;
        long at = headerEnd;
        foreach (SectionEntry entry in header.Sections)
        {
            string name = FileLayout.SectionName(entry.Id);
            string key = FileLayout.SectionKey(entry.Id);

            // The reader has checked the declared total against the file's length, so the frame lies inside it.
            var frame = new ReadOnlySpan<byte>(view.Start + at, FileLayout.SectionFrameBytes);
            uint id = BinaryPrimitives.ReadUInt32LittleEndian(frame);
            uint flags = BinaryPrimitives.ReadUInt32LittleEndian(frame[4..]);
            long length = BinaryPrimitives.ReadInt64LittleEndian(frame[8..]);
            if (id != entry.Id || flags != entry.Flags || length != entry.Length)
            {
                throw new IndexFileException(
                    $"Index file section frame at byte {at} says id {id}, flags {flags}, length {length}; the header lists {name} with flags {entry.Flags}, length {entry.Length}.",
                    key,
                    at);
            }

            at = checked(at + FileLayout.SectionFrameBytes);
            int padding = FileLayout.PaddingAfter(at);
            int nonZero = new ReadOnlySpan<byte>(view.Start + at, padding).IndexOfAnyExcept((byte)0);
            if (nonZero >= 0)
            {
                throw new IndexFileException($"Index file section {name}: padding byte {at + nonZero} is {view.Start[at + nonZero]:X2}; padding must be zero.", key, at + nonZero);
            }

            at = checked(at + padding);
            _payloads.Add((entry, at));
            at = checked(at + entry.Length + FileLayout.ChecksumBytes);
        }

        if (at != view.Length)
        {
            throw new IndexFileException($"Index file has {view.Length - at} unexpected bytes after its last section (which ends at byte {at}).", "end", at);
        }
    }

    /// <summary>The sections in file order.</summary>
    public IReadOnlyList<(SectionEntry Entry, long Offset)> Payloads => _payloads;

    /// <summary>The payload of the section at <paramref name="position"/> in the list: first byte and length.</summary>
    public (IntPtr Start, long Length) Payload(int position)
    {
        (SectionEntry entry, long offset) = _payloads[position];
        return ((IntPtr)(_view.Start + offset), entry.Length);
    }

    /// <summary>Hashes the payload at <paramref name="position"/> and compares it with the stored checksum.</summary>
    public void VerifyChecksum(int position, CancellationToken cancellationToken)
    {
        (SectionEntry entry, long offset) = _payloads[position];
        var hash = new XxHash3();
        for (long done = 0; done < entry.Length; done += BlockBytes)
        {
            cancellationToken.ThrowIfCancellationRequested();
            hash.Append(new ReadOnlySpan<byte>(_view.Start + offset + done, (int)Math.Min(BlockBytes, entry.Length - done)));
        }

        ulong stored = BinaryPrimitives.ReadUInt64LittleEndian(new ReadOnlySpan<byte>(_view.Start + offset + entry.Length, FileLayout.ChecksumBytes));
        ulong computed = hash.GetCurrentHashAsUInt64();
        if (stored != computed)
        {
            throw new IndexFileException(
                $"Index file section {FileLayout.SectionName(entry.Id)} is damaged: the checksum of its {entry.Length} payload bytes (from byte {offset}) is {computed:X16}, the stored one {stored:X16}.",
                FileLayout.SectionKey(entry.Id),
                offset);
        }
    }

    /// <summary>An error about the section at <paramref name="position"/>, placed at its payload.</summary>
    public IndexFileException Problem(int position, string problem)
    {
        (SectionEntry entry, long offset) = _payloads[position];
        return new IndexFileException($"Index file section {FileLayout.SectionName(entry.Id)} (payload from byte {offset}) is invalid: {problem}.", FileLayout.SectionKey(entry.Id), offset);
    }
}
