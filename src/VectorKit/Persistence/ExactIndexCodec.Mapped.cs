using System.Runtime.InteropServices;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Internal;
using VectorKit.Quantization;

namespace VectorKit.Persistence;

/// <summary>The exact index read in place from a mapped file (<see cref="IndexFile.OpenMapped"/>).</summary>
internal sealed partial class ExactIndexCodec
{
    /// <summary>
    /// Builds a read-only exact index whose ids, rows and codes are the mapped file's own pages. Takes ownership of
    /// <paramref name="view"/> (unmapped on failure, or when the index is disposed).
    /// </summary>
    public static unsafe ExactIndex OpenMapped(IndexHeader header, MappedFileView view, MappedSections sections, bool verify, CancellationToken cancellationToken)
    {
        if (header.Count != header.Rows)
        {
            throw IndexHeader.Malformed($"an exact index stores only live rows, but it declares {header.Count} items in {header.Rows} rows");
        }

        int d = header.Dimension;
        int n = (int)header.Rows;
        bool codes = header.Integers.ContainsKey(StorageField)
            && header.Integer(StorageField, (int)VectorEncoding.Float32, (int)VectorEncoding.Scalar8Bit) == (int)VectorEncoding.Scalar8Bit;
        int rescoreDepth = codes ? (int)header.Integer(RescoreDepthField, 0, VectorIndexOptions.MaxRescoreDepth) : 0;
        bool trained = !codes || header.Integer(TrainedField, 0, 1) == 1;
        FullVectorLocation location = codes ? ReadFullVectorLocation(header) : FullVectorLocation.InIndexMemory;
        bool keepsFull = !codes || (rescoreDepth > 0 && location == FullVectorLocation.InIndexMemory);
        if (!trained && n != 0)
        {
            throw IndexHeader.Malformed($"an untrained exact index holds no vectors, but it declares {n}");
        }

        // The sections this variant has, in order; skippable sections this library does not know are passed over.
        var expected = new List<(SectionId Id, long Bytes)> { (SectionId.Ids, checked((long)n * sizeof(long))) };
        int codeBytes = ScalarQuantizer.PaddedLength(d);
        if (codes)
        {
            expected.Add((SectionId.ScalarRanges, trained ? 2L * d * sizeof(float) : 0));
            expected.Add((SectionId.ScalarCodes, checked((long)n * codeBytes)));
        }

        if (keepsFull)
        {
            expected.Add((SectionId.Vectors, checked((long)n * d * sizeof(float))));
        }

        var at = new Dictionary<SectionId, int>();
        int next = 0;
        for (int position = 0; position < sections.Payloads.Count; position++)
        {
            SectionEntry entry = sections.Payloads[position].Entry;
            bool known = Enum.IsDefined(typeof(SectionId), entry.Id);
            if (!known && (entry.Flags & FileLayout.SkippableFlag) != 0)
            {
                continue;
            }

            (SectionId id, long bytes) = next < expected.Count ? expected[next] : (SectionId.IdOrder, checked((long)n * sizeof(int)));
            if (entry.Id != (uint)id || (next == expected.Count && at.ContainsKey(SectionId.IdOrder)))
            {
                throw IndexHeader.Malformed(next <= expected.Count && !at.ContainsKey(SectionId.IdOrder)
                    ? $"section {position} is {FileLayout.SectionName(entry.Id)}; this index kind expects {FileLayout.SectionName((uint)id)} there"
                    : $"section {FileLayout.SectionName(entry.Id)} is listed but this index kind does not use it");
            }

            if (entry.Length != bytes)
            {
                throw sections.Problem(position, $"its length is {entry.Length} bytes; the header's counts require {bytes}");
            }

            at[id] = position;
            next++;
        }

        if (next < expected.Count)
        {
            throw IndexHeader.Malformed($"the section {FileLayout.SectionName((uint)expected[next].Id)} is missing from the section list");
        }

        if (verify)
        {
            foreach (int position in at.Values)
            {
                sections.VerifyChecksum(position, cancellationToken);
            }
        }

        float[]? ranges = null;
        if (codes && trained)
        {
            // Small: always checksummed, and copied (the quantizer derives its padded ranges from them).
            int position = at[SectionId.ScalarRanges];
            sections.VerifyChecksum(position, cancellationToken);
            ranges = new ReadOnlySpan<float>((void*)sections.Payload(position).Start, 2 * d).ToArray();
            if (FiniteCheck.IndexOfNonFinite(ranges) >= 0)
            {
                throw sections.Problem(position, "it holds a non-finite range value");
            }
        }

        long* ids = (long*)sections.Payload(at[SectionId.Ids]).Start;
        if (verify && keepsFull)
        {
            CheckFinite(sections, at[SectionId.Vectors], d, n, cancellationToken);
        }

        IdMap slotOf = MappedIdMap(sections, at, ids, n, verify);
        var idColumn = new IdColumn(0);
        var vectors = new VectorBuffer(d, 0);
        CodeBuffer? codeBuffer = codes ? new CodeBuffer(codeBytes, 0) : null;
        idColumn.Borrow(ids, n);
        if (keepsFull)
        {
            vectors.Borrow((float*)sections.Payload(at[SectionId.Vectors]).Start, n);
        }

        codeBuffer?.Borrow((byte*)sections.Payload(at[SectionId.ScalarCodes]).Start, n);
        try
        {
            return ExactIndex.FromMapped(view, d, header.Metric, idColumn, slotOf, vectors, codeBuffer, ranges, rescoreDepth, location, n, checkPadding: verify);
        }
        catch (InvalidDataException e)
        {
            throw new IndexFileException($"Index file holds an invalid exact index: {e.Message}.", "exact index", -1, e);
        }
    }

    // The id lookup: binary search over the file's id order (format version 3), or, for older files, a table built
    // from the mapped ids (the one part of such a file's opening that grows with the count).
    private static unsafe IdMap MappedIdMap(MappedSections sections, Dictionary<SectionId, int> at, long* ids, int n, bool verify)
    {
        if (at.TryGetValue(SectionId.IdOrder, out int position))
        {
            var lookup = new SortedIdLookup(ids, (int*)sections.Payload(position).Start, n);
            if (verify)
            {
                try
                {
                    lookup.Verify();
                }
                catch (InvalidDataException e)
                {
                    throw sections.Problem(position, e.Message);
                }
            }

            return new IdMap(lookup);
        }

        var map = new IdMap(n);
        for (int slot = 0; slot < n; slot++)
        {
            if (!map.TryAdd(ids[slot], slot))
            {
                throw sections.Problem(at[SectionId.Ids], $"id {ids[slot]} appears at rows {map[ids[slot]]} and {slot}; ids must be unique");
            }
        }

        return map;
    }

    private static unsafe void CheckFinite(MappedSections sections, int position, int d, int n, CancellationToken cancellationToken)
    {
        float* rows = (float*)sections.Payload(position).Start;
        int blockRows = Math.Max(1, BlockBytes / (d * sizeof(float)));
        for (int start = 0; start < n; start += blockRows)
        {
            cancellationToken.ThrowIfCancellationRequested();
            int count = Math.Min(blockRows, n - start);
            var block = new ReadOnlySpan<float>(rows + ((long)start * d), count * d);
            int bad = FiniteCheck.IndexOfNonFinite(block);
            if (bad >= 0)
            {
                long element = ((long)start * d) + bad;
                throw sections.Problem(position, $"it holds a non-finite vector component at row {element / d}, component {element % d}; stored vectors must be finite");
            }
        }
    }
}
