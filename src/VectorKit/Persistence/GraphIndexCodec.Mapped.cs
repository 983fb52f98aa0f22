using VectorKit.Indexes.Graph;
using VectorKit.Internal;
using VectorKit.Quantization;

namespace VectorKit.Persistence;

/// <summary>The graph index read in place from a mapped file (<see cref="IndexFile.OpenMapped(string, MappedOpenOptions?, CancellationToken)"/>).</summary>
internal sealed partial class GraphIndexCodec
{
    /// <summary>
    /// Builds a read-only graph whose ids, removal flags, levels, links, upper-layer starts, rows and codes are the
    /// mapped file's own pages. Unverified, a file of format version 6 costs the header and the scalar ranges (small,
    /// copied after their checksum) at open, nothing per slot: every use of a level or start is range-checked instead.
    /// Older files have their upper-layer starts built from the levels (4 bytes and one pass per slot), and before
    /// version 5 their ids hashed, at open. Takes ownership of <paramref name="view"/> (unmapped on failure, or when the
    /// index is disposed).
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

            // Its length follows from the levels: checked against them when verifying, or for a file without starts.
            (SectionId.UpperLinks, -1),
        };
        bool hasStarts = header.Sections.Exists(s => s.Id == (uint)SectionId.UpperLinkStarts);
        if (hasStarts)
        {
            expected.Add((SectionId.UpperLinkStarts, checked((long)slots * sizeof(int))));
        }

        MappedSections.ExpectRows(expected, d, slots, codes, trained, keepsFull);
        Dictionary<SectionId, int> at = sections.Match(expected, checked((long)count * sizeof(int)), verify, cancellationToken);
        float[]? ranges = codes && trained ? sections.ScalarRanges(at, d, cancellationToken) : null;

        int upperAt = at[SectionId.UpperLinks];
        long upperBytes = sections.Payloads[upperAt].Entry.Length;
        if (upperBytes % sizeof(int) != 0)
        {
            throw sections.Problem(upperAt, $"its length, {upperBytes} bytes, is not a whole number of ints");
        }

        byte* levels = (byte*)sections.Payload(at[SectionId.NodeLevels]).Start;
        int* starts = hasStarts ? (int*)sections.Payload(at[SectionId.UpperLinkStarts]).Start : null;
        if (verify && hasStarts)
        {
            CheckUpperStarts(sections, at, levels, starts, slots, options.LinksPerNode + 1, upperBytes / sizeof(int), cancellationToken);
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
                ids, removed, levels, starts,
                (int*)sections.Payload(at[SectionId.BottomLinks]).Start, (int*)sections.Payload(upperAt).Start, upperBytes / sizeof(int),
                vectors, codeRows, ranges, slotOf, verify);
        }
        catch (InvalidDataException e)
        {
            throw new IndexFileException($"Index file holds an invalid graph: {e.Message}.", "graph", -1, e);
        }
    }

    // The whole column against the levels, as a load checks it: levels within the cap, each start the running total of
    // the levels before it (so the column never decreases), and the total the upper-layer section's length.
    private static unsafe void CheckUpperStarts(MappedSections sections, Dictionary<SectionId, int> at, byte* levels, int* starts, int slots, int upperStride, long upperInts, CancellationToken cancellationToken)
    {
        long running = 0;
        for (int slot = 0; slot < slots; slot++)
        {
            if ((slot & 0xFFFFF) == 0)
            {
                cancellationToken.ThrowIfCancellationRequested();
            }

            int level = levels[slot];
            if (level > GraphIndexParts.MaxNodeLevel)
            {
                throw sections.Problem(at[SectionId.NodeLevels], $"slot {slot} has level {level}; the most is {GraphIndexParts.MaxNodeLevel}");
            }

            if (starts[slot] != running)
            {
                throw sections.Problem(at[SectionId.UpperLinkStarts], StartProblem(slot, starts[slot], running));
            }

            running += (long)level * upperStride;
        }

        if (running != upperInts)
        {
            throw sections.Problem(at[SectionId.UpperLinks], $"it holds {upperInts} ints; the levels require {running}");
        }
    }
}
