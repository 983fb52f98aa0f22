using System.Buffers.Binary;

namespace VectorKit.Persistence;

/// <summary>The fixed parts of the index file layout (see docs/index-file-format.md).</summary>
internal static class FileLayout
{
    /// <summary>
    /// The newest format version this library writes. Readers accept every version from 1 up to this one. Version 2 added
    /// the tuned search defaults (<see cref="TuningFields"/>); version 3 the exact index's <see cref="SectionId.IdOrder"/>
    /// (for mapped opening); version 4 the inverted file's id order and its fast-scan codes as blocks
    /// (<see cref="SectionId.FastScanBlocks"/>), so that an inverted file is searched in place too; version 5 the graph's
    /// id order (of its live slots), so that a graph opens mapped without hashing its ids; version 6 the graph's
    /// <see cref="SectionId.UpperLinkStarts"/>, so that a graph opens mapped without a pass over its levels. A file is
    /// written with the lowest version that holds what it needs.
    /// </summary>
    public const uint CurrentVersion = 6;

    /// <summary>The lowest format version that holds everything <paramref name="header"/> lists.</summary>
    public static uint VersionFor(IndexHeader header)
    {
        if (header.Kind == IndexKind.Graph && header.Sections.Exists(s => s.Id == (uint)SectionId.UpperLinkStarts))
        {
            return 6;
        }

        if (header.Kind == IndexKind.Graph && header.Sections.Exists(s => s.Id == (uint)SectionId.IdOrder))
        {
            return 5;
        }

        foreach (SectionEntry section in header.Sections)
        {
            if (section.Id == (uint)SectionId.FastScanBlocks || (section.Id == (uint)SectionId.IdOrder && header.Kind == IndexKind.InvertedFile))
            {
                return 4;
            }
        }

        foreach (SectionEntry section in header.Sections)
        {
            if (section.Id == (uint)SectionId.IdOrder)
            {
                return 3;
            }
        }

        return TuningFields.VersionFor(header);
    }

    /// <summary>Magic, version (u32), header length (u32).</summary>
    public const int PreambleBytes = 16;

    /// <summary>Section id (u32), flags (u32), payload length (u64).</summary>
    public const int SectionFrameBytes = 16;

    /// <summary>Every checksum is XXH3-64, stored little-endian after what it covers.</summary>
    public const int ChecksumBytes = 8;

    /// <summary>Section payloads start at a multiple of this, counted from the start of the index data (zero padding before).</summary>
    public const int PayloadAlignment = 64;

    /// <summary>Section flag: a reader that does not know the section may skip it.</summary>
    public const uint SkippableFlag = 1;

    /// <summary>The most sections a header may list.</summary>
    public const int MaxSections = 64;

    // 'V' 'K' 'I' 'X', then CR LF SUB LF: a transfer that rewrites line endings or stops at a text end-of-file
    // marker damages the magic itself, so such a copy is recognised at once.
    private static ReadOnlySpan<byte> MagicBytes => [0x56, 0x4B, 0x49, 0x58, 0x0D, 0x0A, 0x1A, 0x0A];

    public static ReadOnlySpan<byte> Magic => MagicBytes;

    /// <summary>Zero bytes between a section frame ending at <paramref name="frameEnd"/> and its aligned payload.</summary>
    public static int PaddingAfter(long frameEnd) => (int)((PayloadAlignment - (frameEnd % PayloadAlignment)) % PayloadAlignment);

    public static void WritePreamble(Span<byte> destination, int headerLength, uint version)
    {
        Magic.CopyTo(destination);
        BinaryPrimitives.WriteUInt32LittleEndian(destination[8..], version);
        BinaryPrimitives.WriteInt32LittleEndian(destination[12..], headerLength);
    }

    /// <summary>The section's name alone (for <see cref="IndexFileException.Section"/>).</summary>
    public static string SectionKey(uint id) => Enum.IsDefined(typeof(SectionId), id) ? ((SectionId)id).ToString() : $"section {id}";

    /// <summary>The section's name and id, for messages.</summary>
    public static string SectionName(uint id) => Enum.IsDefined(typeof(SectionId), id) ? $"'{(SectionId)id}' (id {id})" : $"id {id}";
}
