using System.Buffers;
using MessagePack;
using VectorKit.Distance;

namespace VectorKit.Persistence;

/// <summary>
/// The metadata block of an index file, encoded as one MessagePack map with string keys. Written and read with the
/// low-level MessagePack writer and reader: only numbers and strings are decoded, into fixed fields; no type
/// information is taken from the file, and nesting depth is bounded by <see cref="MaxDepth"/>.
/// </summary>
/// <remarks>
/// Keys: <c>kind</c>, <c>metric</c>, <c>dimension</c>, <c>count</c> (live items), <c>rows</c> (stored rows, removed graph
/// slots included), <c>fields</c> (a map of kind-specific numbers, such as graph options) and <c>sections</c> (an array
/// of <c>[id, flags, length]</c>). Unknown keys are skipped, so a later version may add keys without breaking readers.
/// </remarks>
internal sealed class IndexHeader
{
    public IndexKind Kind { get; set; }

    /// <summary>The format version from the preamble (not part of the encoded map); set by the reader.</summary>
    public uint FormatVersion { get; set; } = FileLayout.CurrentVersion;

    public DistanceMetric Metric { get; set; }

    public int Dimension { get; set; }

    public long Count { get; set; }

    public long Rows { get; set; }

    public Dictionary<string, long> Integers { get; } = new(StringComparer.Ordinal);

    public Dictionary<string, double> Reals { get; } = new(StringComparer.Ordinal);

    public List<SectionEntry> Sections { get; } = [];

    public byte[] Encode()
    {
        var buffer = new ArrayBufferWriter<byte>(256);
        var writer = new MessagePackWriter(buffer);
        writer.WriteMapHeader(7);
        writer.Write("kind");
        writer.Write((int)Kind);
        writer.Write("metric");
        writer.Write((int)Metric);
        writer.Write("dimension");
        writer.Write(Dimension);
        writer.Write("count");
        writer.Write(Count);
        writer.Write("rows");
        writer.Write(Rows);
        writer.Write("fields");
        writer.WriteMapHeader(Integers.Count + Reals.Count);

        // Sorted keys: the same index always gives the same bytes.
        foreach (string key in Integers.Keys.Order(StringComparer.Ordinal))
        {
            writer.Write(key);
            writer.Write(Integers[key]);
        }

        foreach (string key in Reals.Keys.Order(StringComparer.Ordinal))
        {
            writer.Write(key);
            writer.Write(Reals[key]);
        }

        writer.Write("sections");
        writer.WriteArrayHeader(Sections.Count);
        foreach (SectionEntry section in Sections)
        {
            writer.WriteArrayHeader(3);
            writer.Write(section.Id);
            writer.Write(section.Flags);
            writer.Write(section.Length);
        }

        writer.Flush();
        return buffer.WrittenSpan.ToArray();
    }

    /// <summary>Decodes a header whose checksum has been verified; throws <see cref="IndexFileException"/> on anything malformed.</summary>
    public static IndexHeader Decode(ReadOnlyMemory<byte> bytes)
    {
        var header = new IndexHeader();
        var reader = new MessagePackReader(bytes);
        bool kind = false, metric = false, dimension = false, count = false, rows = false, sections = false;
        string key = "(map)";
        try
        {
            if (reader.NextMessagePackType != MessagePackType.Map)
            {
                throw Malformed($"the header is a MessagePack {reader.NextMessagePackType}, expected a map");
            }

            int entries = reader.ReadMapHeader();
            DepthStep(ref reader);
            for (int i = 0; i < entries; i++)
            {
                key = ReadKey(ref reader);
                switch (key)
                {
                    case "kind":
                        header.Kind = (IndexKind)reader.ReadInt32();
                        kind = true;
                        break;
                    case "metric":
                        header.Metric = (DistanceMetric)reader.ReadInt32();
                        metric = true;
                        break;
                    case "dimension":
                        header.Dimension = reader.ReadInt32();
                        dimension = true;
                        break;
                    case "count":
                        header.Count = reader.ReadInt64();
                        count = true;
                        break;
                    case "rows":
                        header.Rows = reader.ReadInt64();
                        rows = true;
                        break;
                    case "fields":
                        ReadFields(ref reader, header);
                        break;
                    case "sections":
                        ReadSections(ref reader, header);
                        sections = true;
                        break;
                    default:
                        SkipValue(ref reader);
                        break;
                }
            }

            reader.Depth--;
            key = "(end)";
            if (!reader.End)
            {
                throw Malformed($"{bytes.Length - reader.Consumed} bytes follow the header map");
            }
        }
        catch (Exception e) when (e is not IndexFileException and not OutOfMemoryException)
        {
            // The decoder works on a bounded, checksummed buffer in memory: whatever it throws (MessagePack's own
            // errors, end of data, depth limit, overflow, out-of-range lengths) means the header is malformed.
            throw new IndexFileException(
                $"Index file header is malformed at key '{key}' (header byte {reader.Consumed}): {e.Message}", "header", FileLayout.PreambleBytes + reader.Consumed, e);
        }

        string? missing = !kind ? "kind" : !metric ? "metric" : !dimension ? "dimension" : !count ? "count" : !rows ? "rows" : !sections ? "sections" : null;
        if (missing is not null)
        {
            throw Malformed($"the required key '{missing}' is missing");
        }

        return header;
    }

    /// <summary>A kind-specific integer field, required, within [min, max].</summary>
    public long Integer(string name, long min, long max)
    {
        if (!Integers.TryGetValue(name, out long value))
        {
            throw Malformed($"the field '{name}' is missing (an integer in [{min}, {max}] was expected)");
        }

        if (value < min || value > max)
        {
            throw Malformed($"the field '{name}' is {value}; expected a value in [{min}, {max}]");
        }

        return value;
    }

    /// <summary>A kind-specific real field, required, within [min, max] (NaN rejected).</summary>
    public double Real(string name, double min, double max)
    {
        if (!Reals.TryGetValue(name, out double value))
        {
            throw Malformed($"the field '{name}' is missing (a number in [{min}, {max}] was expected)");
        }

        if (!(value >= min && value <= max))
        {
            throw Malformed($"the field '{name}' is {value}; expected a value in [{min}, {max}]");
        }

        return value;
    }

    public static IndexFileException Malformed(string problem)
        => new($"Index file header is invalid: {problem}.", "header", FileLayout.PreambleBytes);

    private static string ReadKey(ref MessagePackReader reader)
    {
        if (reader.NextMessagePackType != MessagePackType.String)
        {
            throw Malformed($"a map key is a MessagePack {reader.NextMessagePackType}, expected a string");
        }

        return reader.ReadString() ?? string.Empty;
    }

    private static void ReadFields(ref MessagePackReader reader, IndexHeader header)
    {
        int entries = reader.ReadMapHeader();
        DepthStep(ref reader);
        for (int i = 0; i < entries; i++)
        {
            string name = ReadKey(ref reader);
            switch (reader.NextMessagePackType)
            {
                case MessagePackType.Integer:
                    header.Integers[name] = reader.ReadInt64();
                    break;
                case MessagePackType.Float:
                    header.Reals[name] = reader.ReadDouble();
                    break;
                default:
                    throw Malformed($"the field '{name}' is a MessagePack {reader.NextMessagePackType}, expected a number");
            }
        }

        reader.Depth--;
    }

    private static void ReadSections(ref MessagePackReader reader, IndexHeader header)
    {
        int count = reader.ReadArrayHeader();
        if (count > FileLayout.MaxSections)
        {
            throw Malformed($"it lists {count} sections; at most {FileLayout.MaxSections} are allowed");
        }

        DepthStep(ref reader);
        for (int i = 0; i < count; i++)
        {
            int parts = reader.ReadArrayHeader();
            if (parts != 3)
            {
                throw Malformed($"section entry {i} has {parts} elements; expected 3 (id, flags, length)");
            }

            uint id = reader.ReadUInt32();
            uint flags = reader.ReadUInt32();
            long length = reader.ReadInt64();
            if (length < 0)
            {
                throw Malformed($"section {FileLayout.SectionName(id)} declares a negative length {length}");
            }

            header.Sections.Add(new SectionEntry(id, flags, length));
        }

        reader.Depth--;
    }

    /// <summary>
    /// The deepest nesting a header may have: the limit of MessagePack's untrusted-data preset, checked here because
    /// touching <c>MessagePackSecurity</c> pulls its reflection-based comparers into trimmed and native AOT apps.
    /// </summary>
    internal const int MaxDepth = 500;

    // MessagePackReader.Skip recurses without a depth limit; this one counts depth against MaxDepth.
    private static void SkipValue(ref MessagePackReader reader)
    {
        switch (reader.NextMessagePackType)
        {
            case MessagePackType.Array:
            {
                int n = reader.ReadArrayHeader();
                DepthStep(ref reader);
                for (int i = 0; i < n; i++)
                {
                    SkipValue(ref reader);
                }

                reader.Depth--;
                break;
            }

            case MessagePackType.Map:
            {
                int n = reader.ReadMapHeader();
                DepthStep(ref reader);
                for (int i = 0; i < n; i++)
                {
                    SkipValue(ref reader);
                    SkipValue(ref reader);
                }

                reader.Depth--;
                break;
            }

            default:
                reader.Skip();
                break;
        }
    }

    // Same contract as MessagePackSecurity.DepthStep: throws InsufficientExecutionStackException at the limit.
    private static void DepthStep(ref MessagePackReader reader)
    {
        if (reader.Depth >= MaxDepth)
        {
            throw new InsufficientExecutionStackException($"the header nests deeper than {MaxDepth} levels");
        }

        reader.Depth++;
    }
}
