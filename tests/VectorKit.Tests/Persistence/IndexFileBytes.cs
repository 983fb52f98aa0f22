using System.Buffers.Binary;
using System.IO.Hashing;
using VectorKit.Indexes;
using VectorKit.Persistence;

namespace VectorKit.Tests.Persistence;

/// <summary>
/// The index file layout re-implemented independently of the library's writer and reader (from docs/index-file-format.md),
/// for tests that map, damage, craft and re-checksum files.
/// </summary>
internal static class IndexFileBytes
{
    public const int Preamble = 16;

    public static byte[] Save(IVectorIndex index)
    {
        var stream = new MemoryStream();
        IndexFile.Save(index, stream);
        return stream.ToArray();
    }

    public static IVectorIndex Load(byte[] file, IndexLoadOptions? options = null) => IndexFile.Load(new MemoryStream(file, writable: false), options);

    public static int HeaderLength(byte[] file) => BinaryPrimitives.ReadInt32LittleEndian(file.AsSpan(12));

    /// <summary>The end of the header checksum, where the first section frame starts.</summary>
    public static int HeaderEnd(byte[] file) => (int)Math.Min(int.MaxValue, Preamble + (long)(uint)HeaderLength(file) + 8);

    public static IndexHeader Header(byte[] file) => IndexHeader.Decode(file.AsMemory(Preamble, HeaderLength(file)));

    /// <summary>Every section's frame, payload and checksum positions, following the frames' own lengths.</summary>
    public static List<SectionSpan> Map(byte[] file)
    {
        var sections = new List<SectionSpan>();
        long at = HeaderEnd(file);
        while (at >= 0 && at + 16 <= file.Length)
        {
            uint id = BinaryPrimitives.ReadUInt32LittleEndian(file.AsSpan((int)at));
            long length = BinaryPrimitives.ReadInt64LittleEndian(file.AsSpan((int)at + 8));
            long payload = Align(at + 16);
            if (length < 0 || length > file.Length || payload + length + 8 > file.Length)
            {
                break;
            }

            sections.Add(new SectionSpan(id, at, payload, length));
            at = payload + length + 8;
        }

        return sections;
    }

    /// <summary>Recomputes the header checksum and every complete section's checksum, so damage reaches the structural checks.</summary>
    public static void FixChecksums(byte[] file)
    {
        if (file.Length < Preamble)
        {
            return;
        }

        int headerLength = HeaderLength(file);
        if (headerLength < 0 || (long)Preamble + headerLength + 8 > file.Length)
        {
            return;
        }

        BinaryPrimitives.WriteUInt64LittleEndian(file.AsSpan(Preamble + headerLength), XxHash3.HashToUInt64(file.AsSpan(0, Preamble + headerLength)));
        foreach (SectionSpan section in Map(file))
        {
            BinaryPrimitives.WriteUInt64LittleEndian(
                file.AsSpan((int)section.ChecksumStart),
                XxHash3.HashToUInt64(file.AsSpan((int)section.PayloadStart, (int)section.Length)));
        }
    }

    /// <summary>
    /// Writes a file from a header and section payloads, without the library's checks: frames carry the header's
    /// declared lengths even when the payload given is shorter, so hostile files can be built with valid checksums.
    /// </summary>
    public static byte[] Compose(IndexHeader header, IReadOnlyList<byte[]> payloads, uint version = 1)
    {
        byte[] encoded = header.Encode();
        var output = new MemoryStream();
        var preamble = new byte[Preamble];
        "VKIX\r\n\u001a\n"u8.CopyTo(preamble);
        BinaryPrimitives.WriteUInt32LittleEndian(preamble.AsSpan(8), version);
        BinaryPrimitives.WriteInt32LittleEndian(preamble.AsSpan(12), encoded.Length);
        output.Write(preamble);
        output.Write(encoded);
        byte[] headerBytes = output.ToArray();
        WriteUInt64(output, XxHash3.HashToUInt64(headerBytes));
        for (int i = 0; i < payloads.Count; i++)
        {
            SectionEntry entry = header.Sections[i];
            var frame = new byte[16];
            BinaryPrimitives.WriteUInt32LittleEndian(frame, entry.Id);
            BinaryPrimitives.WriteUInt32LittleEndian(frame.AsSpan(4), entry.Flags);
            BinaryPrimitives.WriteInt64LittleEndian(frame.AsSpan(8), entry.Length);
            output.Write(frame);
            output.Write(new byte[Align(output.Length) - output.Length]);
            output.Write(payloads[i]);
            WriteUInt64(output, XxHash3.HashToUInt64(payloads[i]));
        }

        return output.ToArray();
    }

    /// <summary>Payloads of every section of a well-formed file, in order.</summary>
    public static List<byte[]> Payloads(byte[] file)
        => Map(file).Select(s => file.AsSpan((int)s.PayloadStart, (int)s.Length).ToArray()).ToList();

    public static IndexHeader CopyHeader(IndexHeader source)
    {
        var copy = new IndexHeader { Kind = source.Kind, Metric = source.Metric, Dimension = source.Dimension, Count = source.Count, Rows = source.Rows };
        foreach ((string key, long value) in source.Integers)
        {
            copy.Integers[key] = value;
        }

        foreach ((string key, double value) in source.Reals)
        {
            copy.Reals[key] = value;
        }

        copy.Sections.AddRange(source.Sections);
        return copy;
    }

    private static long Align(long offset) => (offset + 63) / 64 * 64;

    private static void WriteUInt64(Stream stream, ulong value)
    {
        var bytes = new byte[8];
        BinaryPrimitives.WriteUInt64LittleEndian(bytes, value);
        stream.Write(bytes);
    }
}

/// <summary>One section of a mapped file.</summary>
internal sealed record SectionSpan(uint Id, long FrameStart, long PayloadStart, long Length)
{
    public long ChecksumStart => PayloadStart + Length;

    public long End => ChecksumStart + 8;

    public string Name => Enum.IsDefined(typeof(SectionId), Id) ? ((SectionId)Id).ToString() : $"id {Id}";
}
