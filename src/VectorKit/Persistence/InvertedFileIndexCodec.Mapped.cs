using VectorKit.Indexes;
using VectorKit.Indexes.InvertedFile;
using VectorKit.Internal;
using VectorKit.Quantization;

namespace VectorKit.Persistence;

/// <summary>The inverted file read in place from a mapped file (<see cref="IndexFile.OpenMapped(string, MappedOpenOptions?, CancellationToken)"/>).</summary>
internal sealed partial class InvertedFileIndexCodec
{
    /// <summary>
    /// Builds a read-only inverted file whose list codes, ids and full vectors are the mapped file's own pages; the
    /// centroids, quantizer and list lengths (small: per list or per sub-space) are copied after their checksums.
    /// Takes ownership of <paramref name="view"/> (unmapped on failure, or when the index is disposed).
    /// </summary>
    /// <exception cref="NotSupportedException">A fast-scan file of format version 1 to 3 (codes one after another, not the search's blocks) that holds entries.</exception>
    public static unsafe InvertedFileIndex OpenMapped(IndexHeader header, MappedFileView view, MappedSections sections, bool verify, CancellationToken cancellationToken)
    {
        InvertedFileOptions options;
        bool trained;
        int codeBytes;
        try
        {
            (options, trained, codeBytes) = ReadOptions(header);
        }
        catch (ArgumentException e)
        {
            throw IndexHeader.Malformed($"the stored options are invalid: {e.Message}");
        }

        int d = header.Dimension;
        int count = (int)header.Count;
        int lists = options.ListCount;
        bool fourBit = options.UsesFastScan;
        bool packed = header.Sections.Exists(s => s.Id == (uint)SectionId.FastScanBlocks);
        if (fourBit && !packed && count > 0)
        {
            throw new NotSupportedException(
                $"The index file holds a fast-scan inverted file of format version {header.FormatVersion}, whose codes are stored one after another rather than in the search's blocks, so it cannot be searched in place. Load it with IndexFile.Load, or load and save it again to write format version 4.");
        }

        var expected = new List<(SectionId Id, long Bytes)> { (SectionId.Centroids, trained ? checked((long)lists * d * sizeof(float)) : 0) };
        if (options.Encoding == VectorEncoding.ProductCodes)
        {
            expected.Add(fourBit
                ? (SectionId.FourBitCodebooks, trained ? checked((long)d * FourBitQuantizer.CodewordsPerSubspace * sizeof(float)) : 0)
                : (SectionId.ProductCodebooks, trained ? checked((long)d * ProductQuantizer.CodewordsPerSubspace * sizeof(float)) : 0));
            if (options.ProductCodeRotation != SubspaceRotation.None)
            {
                expected.Add((SectionId.ProductRotation, trained ? checked((long)d * d * sizeof(float)) : 0));
            }
        }
        else if (options.Encoding == VectorEncoding.Scalar8Bit)
        {
            expected.Add((SectionId.ScalarRanges, trained ? 2L * d * sizeof(float) : 0));
        }

        expected.Add((SectionId.ListLengths, checked((long)lists * sizeof(int))));
        expected.Add((SectionId.Ids, checked((long)count * sizeof(long))));
        expected.Add(packed ? (SectionId.FastScanBlocks, -1) : (SectionId.ListCodes, checked((long)count * codeBytes)));
        bool keepsFull = options.KeepsFullVectorsInMemory;
        if (keepsFull)
        {
            expected.Add((SectionId.Vectors, checked((long)count * d * sizeof(float))));
        }

        Dictionary<SectionId, int> at = sections.Match(expected, checked((long)count * sizeof(int)), verify, cancellationToken);
        float[] centroids = sections.CopySmall<float>(at[SectionId.Centroids], trained ? checked(lists * d) : 0, cancellationToken);
        float[]? codewords = null, fourBitCodewords = null, rotation = null, ranges = null;
        if (trained && options.Encoding == VectorEncoding.ProductCodes)
        {
            if (fourBit)
            {
                fourBitCodewords = sections.CopySmall<float>(at[SectionId.FourBitCodebooks], checked(d * FourBitQuantizer.CodewordsPerSubspace), cancellationToken);
            }
            else
            {
                codewords = sections.CopySmall<float>(at[SectionId.ProductCodebooks], checked(d * ProductQuantizer.CodewordsPerSubspace), cancellationToken);
            }

            if (options.ProductCodeRotation != SubspaceRotation.None)
            {
                rotation = sections.CopySmall<float>(at[SectionId.ProductRotation], checked(d * d), cancellationToken);
            }
        }
        else if (trained && options.Encoding == VectorEncoding.Scalar8Bit)
        {
            ranges = sections.CopySmall<float>(at[SectionId.ScalarRanges], 2 * d, cancellationToken);
        }

        int lengthsAt = at[SectionId.ListLengths];
        int[] lengths = sections.CopySmall<int>(lengthsAt, lists, cancellationToken);
        int codesAt = at[packed ? SectionId.FastScanBlocks : SectionId.ListCodes];
        // Every list start is a sum of lengths: they must be non-negative and add up to the count the sections hold.
        long total = 0;
        foreach (int length in lengths)
        {
            if (length < 0)
            {
                throw sections.Problem(lengthsAt, $"a list has length {length}");
            }

            total += length;
        }

        if (total != count)
        {
            throw sections.Problem(lengthsAt, $"the list lengths add up to {total}, but the header declares {count} vectors");
        }

        if (packed)
        {
            // The blocks' length follows from the lengths.
            long bytes = FastScanBlockBytes(lengths, codeBytes);
            if (sections.Payloads[codesAt].Entry.Length != bytes)
            {
                throw sections.Problem(codesAt, $"its length is {sections.Payloads[codesAt].Entry.Length} bytes; the list lengths require {bytes}");
            }
        }

        long* ids = (long*)sections.Payload(at[SectionId.Ids]).Start;
        IdMap slotOf = sections.IdMap(at, ids, count, verify);
        VectorBuffer? full = null;
        if (keepsFull)
        {
            if (verify)
            {
                sections.CheckFiniteRows(at[SectionId.Vectors], d, count, cancellationToken);
            }

            full = new VectorBuffer(d, 0);
            full.Borrow((float*)sections.Payload(at[SectionId.Vectors]).Start, count);
        }

        var parts = new InvertedFileIndexParts
        {
            Dimension = d,
            Metric = header.Metric,
            Options = options,
            Trained = trained,
            Count = count,
            Centroids = centroids,
            ProductCodewords = codewords,
            FourBitCodewords = fourBitCodewords,
            ProductRotation = rotation,
            ScalarRanges = ranges,
            ListLengths = lengths,
            ListCodes = [],
            Ids = [],
        };
        try
        {
            return InvertedFileIndex.FromMapped(view, parts, (byte*)sections.Payload(codesAt).Start, ids, full, slotOf, verify, cancellationToken);
        }
        catch (InvalidDataException e)
        {
            throw new IndexFileException($"Index file holds an invalid inverted file: {e.Message}.", "inverted file", -1, e);
        }
    }
}
