using System.Runtime.InteropServices;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Internal;
using VectorKit.Quantization;

namespace VectorKit.Persistence;

/// <summary>The exact index read in place from a mapped file (<see cref="IndexFile.OpenMapped(string, MappedOpenOptions?, CancellationToken)"/>).</summary>
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
        MappedSections.ExpectRows(expected, d, n, codes, trained, keepsFull);
        Dictionary<SectionId, int> at = sections.Match(expected, checked((long)n * sizeof(int)), verify, cancellationToken);
        float[]? ranges = codes && trained ? sections.ScalarRanges(at, d, cancellationToken) : null;

        long* ids = (long*)sections.Payload(at[SectionId.Ids]).Start;
        if (verify && keepsFull)
        {
            sections.CheckFiniteRows(at[SectionId.Vectors], d, n, cancellationToken);
        }

        IdMap slotOf = sections.IdMap(at, ids, n, verify);
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
}
