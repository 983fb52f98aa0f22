using VectorKit.Indexes.Graph;
using VectorKit.Internal;
using VectorKit.Quantization;

namespace VectorKit.Persistence;

/// <summary>The graph index read in place from a mapped file (<see cref="IndexFile.OpenMapped(string, MappedOpenOptions?, CancellationToken)"/>).</summary>
internal sealed partial class GraphIndexCodec
{
    /// <summary>
    /// Builds a read-only graph whose ids, removal flags, links, rows and codes are the mapped file's own pages. At open
    /// it reads the header, the scalar ranges (small, copied after their checksum) and the levels (one byte per slot,
    /// copied), from which it builds each node's upper-layer start (4 bytes per slot); ids are found through the file's
    /// id order (format version 5), or, in older files, hashed at open. Takes ownership of <paramref name="view"/>
    /// (unmapped on failure, or when the index is disposed).
    /// </summary>
    public static unsafe GraphIndex OpenMapped(IndexHeader header, MappedFileView view, MappedSections sections, IndexLoadOptions load, bool verify, CancellationToken cancellationToken)
    {
        (GraphIndexOptions options, int slots, bool codes, bool trained, bool keepsFull, int entrySlot, int entryLevel) = ReadLayout(header, load.MaxLinksPerNode);
        int d = header.Dimension;
        int count = (int)header.Count;
        int codeBytes = ScalarQuantizer.PaddedLength(d);
        var expected = new List<(SectionId Id, long Bytes)>
        {
            (SectionId.Ids, checked((long)slots * sizeof(long))),
            (SectionId.NodeLevels, slots),
            (SectionId.RemovedFlags, slots),
            (SectionId.BottomLinks, checked((long)slots * (options.EffectiveBottomLayerLinks + 1) * sizeof(int))),

            // Its length follows from the levels; GraphLinks.Mapped checks it.
            (SectionId.UpperLinks, -1),
        };
        MappedSections.ExpectRows(expected, d, slots, codes, trained, keepsFull);
        Dictionary<SectionId, int> at = sections.Match(expected, checked((long)count * sizeof(int)), verify, cancellationToken);
        float[]? ranges = codes && trained ? sections.ScalarRanges(at, d, cancellationToken) : null;

        int upperAt = at[SectionId.UpperLinks];
        long upperBytes = sections.Payloads[upperAt].Entry.Length;
        if (upperBytes % sizeof(int) != 0)
        {
            throw sections.Problem(upperAt, $"its length, {upperBytes} bytes, is not a whole number of ints");
        }

        if (verify && keepsFull)
        {
            sections.CheckFiniteRows(at[SectionId.Vectors], d, slots, cancellationToken);
        }

        long* ids = (long*)sections.Payload(at[SectionId.Ids]).Start;
        byte* removed = (byte*)sections.Payload(at[SectionId.RemovedFlags]).Start;
        IdMap slotOf = sections.IdMap(at, ids, count, slots, removed, verify);
        VectorBuffer? vectors = null;
        CodeBuffer? codeRows = null;
        if (keepsFull)
        {
            vectors = new VectorBuffer(d, 0);
            vectors.Borrow((float*)sections.Payload(at[SectionId.Vectors]).Start, slots);
        }

        if (codes)
        {
            codeRows = new CodeBuffer(codeBytes, 0);
            codeRows.Borrow((byte*)sections.Payload(at[SectionId.ScalarCodes]).Start, slots);
        }

        try
        {
            return GraphIndex.FromMapped(
                view, options, d, header.Metric, slots, count, (entrySlot, entryLevel),
                ids, removed, (byte*)sections.Payload(at[SectionId.NodeLevels]).Start,
                (int*)sections.Payload(at[SectionId.BottomLinks]).Start, (int*)sections.Payload(upperAt).Start, upperBytes / sizeof(int),
                vectors, codeRows, ranges, slotOf, verify);
        }
        catch (InvalidDataException e)
        {
            throw new IndexFileException($"Index file holds an invalid graph: {e.Message}.", "graph", -1, e);
        }
    }
}
