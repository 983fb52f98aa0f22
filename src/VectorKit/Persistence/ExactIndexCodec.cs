using System.Runtime.InteropServices;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Quantization;
using VectorKit.Internal;

namespace VectorKit.Persistence;

/// <summary>
/// The exact index. Float32 storage: no kind-specific fields; sections <see cref="SectionId.Ids"/> and
/// <see cref="SectionId.Vectors"/> (the layout of the first files, unchanged). 8-bit storage: fields
/// <c>vector-storage</c> (1), <c>rescore-depth</c> and <c>trained</c>; sections <see cref="SectionId.Ids"/>,
/// <see cref="SectionId.ScalarRanges"/> (empty when untrained), <see cref="SectionId.ScalarCodes"/>, and
/// <see cref="SectionId.Vectors"/> when the full vectors are kept in memory; an index reading full vectors from an
/// external source records that in the field <c>full-vector-location</c> (1) and stores no vectors.
/// </summary>
internal sealed partial class ExactIndexCodec : IndexCodec
{
    private const string StorageField = "vector-storage";
    private const string RescoreDepthField = "rescore-depth";
    private const string TrainedField = "trained";
    private const int BlockBytes = 1 << 20;

    public override IndexKind Kind => IndexKind.Exact;

    public override Type IndexType => typeof(ExactIndex);

    public override void Save(IVectorIndex index, IndexFileWriter writer)
    {
        var exact = (ExactIndex)index;
        if (exact.Options.Encoding == VectorEncoding.Scalar8Bit)
        {
            exact.ExportCodeParts(parts => SaveCodes(exact, parts, writer));
            return;
        }

        exact.ExportParts((count, ids, vectors) =>
        {
            int d = exact.Dimension;
            var header = new IndexHeader { Kind = Kind, Metric = exact.Metric, Dimension = d, Count = count, Rows = count };
            header.Sections.Add(new SectionEntry((uint)SectionId.Ids, 0, checked((long)count * sizeof(long))));
            header.Sections.Add(new SectionEntry((uint)SectionId.Vectors, 0, checked((long)count * d * sizeof(float))));
            AddIdOrder(header, count);
            writer.WriteHeader(header);
            writer.BeginSection(SectionId.Ids);
            writer.Write<long>(ids.Rows(count));
            writer.EndSection();
            writer.BeginSection(SectionId.Vectors);
            FileBlocks.WriteRows(writer, vectors, count);
            writer.EndSection();
            WriteIdOrder(writer, ids.Rows(count));
            writer.Finish();
            return 0;
        });
    }

    public override IVectorIndex Load(IndexHeader header, IndexFileReader reader)
    {
        if (header.Count != header.Rows)
        {
            throw IndexHeader.Malformed($"an exact index stores only live rows, but it declares {header.Count} items in {header.Rows} rows");
        }

        // Files without the field are float32 (every file written before 8-bit storage existed).
        if (header.Integers.ContainsKey(StorageField) && header.Integer(StorageField, (int)VectorEncoding.Float32, (int)VectorEncoding.Scalar8Bit) == (int)VectorEncoding.Scalar8Bit)
        {
            return LoadCodes(header, reader);
        }

        int n = (int)header.Rows;
        IdColumn ids = ReadIds(reader, n);
        reader.OpenSection(SectionId.Vectors);
        var vectors = new VectorBuffer(header.Dimension, 0);

        // Norms are derived block by block while the rows are still in cache, instead of in a second pass.
        float[]? norms = ExactIndex.KeepsSquaredNorms(header.Metric) ? GC.AllocateUninitializedArray<float>(n) : null;
        try
        {
            reader.ReadRows(vectors, n, norms is null ? null : (first, count) => ExactIndex.ComputeSquaredNorms(vectors, first, count, norms));
            reader.CloseSection();
            SkipIdOrder(header, reader);
        }
        catch
        {
            vectors.Dispose();
            ids.Dispose();
            throw;
        }

        try
        {
            return ExactIndex.FromParts(header.Dimension, header.Metric, ids, vectors, n, norms);
        }
        catch (InvalidDataException e)
        {
            throw new IndexFileException($"Index file section 'Ids' is invalid: {e.Message}.", "Ids", -1, e);
        }
    }

    private int SaveCodes(ExactIndex exact, ExactIndex.CodeParts parts, IndexFileWriter writer)
    {
        int d = exact.Dimension;
        int count = parts.Count;
        int codeBytes = parts.Codes.Dimension;
        var header = new IndexHeader { Kind = Kind, Metric = exact.Metric, Dimension = d, Count = count, Rows = count };
        header.Integers[StorageField] = (int)VectorEncoding.Scalar8Bit;
        header.Integers[RescoreDepthField] = exact.Options.RescoreDepth;
        header.Integers[TrainedField] = parts.Scalar is null ? 0 : 1;
        WriteFullVectorLocation(header, exact.Options.FullVectors);
        int rangeValues = parts.Scalar is null ? 0 : 2 * d;
        header.Sections.Add(new SectionEntry((uint)SectionId.Ids, 0, checked((long)count * sizeof(long))));
        header.Sections.Add(new SectionEntry((uint)SectionId.ScalarRanges, 0, checked((long)rangeValues * sizeof(float))));
        header.Sections.Add(new SectionEntry((uint)SectionId.ScalarCodes, 0, checked((long)count * codeBytes)));
        if (parts.FullVectors is not null)
        {
            header.Sections.Add(new SectionEntry((uint)SectionId.Vectors, 0, checked((long)count * d * sizeof(float))));
        }

        AddIdOrder(header, count);
        writer.WriteHeader(header);
        writer.BeginSection(SectionId.Ids);
        writer.Write<long>(parts.Ids.Rows(count));
        writer.EndSection();
        writer.BeginSection(SectionId.ScalarRanges);
        if (parts.Scalar is ScalarQuantizer scalar)
        {
            writer.Write<float>(scalar.Minimums);
            writer.Write<float>(scalar.Steps);
        }

        writer.EndSection();
        writer.BeginSection(SectionId.ScalarCodes);
        int blockRows = Math.Max(1, BlockBytes / codeBytes);
        for (int start = 0; start < count; start += blockRows)
        {
            int n = Math.Min(blockRows, count - start);
            writer.Write(MemoryMarshal.CreateReadOnlySpan(ref parts.Codes.Row(start), n * codeBytes));
        }

        writer.EndSection();
        if (parts.FullVectors is VectorBuffer full)
        {
            writer.BeginSection(SectionId.Vectors);
            FileBlocks.WriteRows(writer, full, count);
            writer.EndSection();
        }

        WriteIdOrder(writer, parts.Ids.Rows(count));
        writer.Finish();
        return 0;
    }

    private static ExactIndex LoadCodes(IndexHeader header, IndexFileReader reader)
    {
        int d = header.Dimension;
        int n = (int)header.Rows;
        int rescoreDepth = (int)header.Integer(RescoreDepthField, 0, VectorIndexOptions.MaxRescoreDepth);
        bool trained = header.Integer(TrainedField, 0, 1) == 1;
        FullVectorLocation location = ReadFullVectorLocation(header);
        if (!trained && n != 0)
        {
            throw IndexHeader.Malformed($"an untrained exact index holds no vectors, but it declares {n}");
        }

        int codeBytes = ScalarQuantizer.PaddedLength(d);
        IdColumn ids = ReadIds(reader, n);
        float[] ranges;
        try
        {
            reader.OpenSection(SectionId.ScalarRanges);
            ranges = reader.ReadArray<float>(trained ? 2 * d : 0);
            reader.CloseSection();
        }
        catch
        {
            ids.Dispose();
            throw;
        }

        reader.OpenSection(SectionId.ScalarCodes);
        var codes = new CodeBuffer(codeBytes, 0);
        VectorBuffer? full = null;
        try
        {
            ReadCodes(reader, codes, n);
            reader.CloseSection();
            if (rescoreDepth > 0 && location == FullVectorLocation.InIndexMemory)
            {
                reader.OpenSection(SectionId.Vectors);
                full = new VectorBuffer(d, 0);
                reader.ReadRows(full, n);
                reader.CloseSection();
            }

            SkipIdOrder(header, reader);
        }
        catch
        {
            codes.Dispose();
            full?.Dispose();
            ids.Dispose();
            throw;
        }

        try
        {
            return ExactIndex.FromCodeParts(d, header.Metric, rescoreDepth, location, trained ? ranges : null, ids, codes, full, n);
        }
        catch (InvalidDataException e)
        {
            throw new IndexFileException($"Index file holds an invalid 8-bit exact index: {e.Message}.", "exact index", -1, e);
        }
    }

    // The ids straight into their native column.
    private static IdColumn ReadIds(IndexFileReader reader, int rows)
    {
        reader.OpenSection(SectionId.Ids);
        var ids = new IdColumn(0);
        try
        {
            reader.ReadColumn(ids, rows);
            reader.CloseSection();
            return ids;
        }
        catch
        {
            ids.Dispose();
            throw;
        }
    }

    // Codes straight into the native block in blocks of whole rows; on a stream of unknown length the block grows
    // only as the data arrives.
    private static void ReadCodes(IndexFileReader reader, CodeBuffer codes, int rows)
    {
        int size = codes.Dimension;
        reader.ExpectPayload(checked((long)rows * size));
        int blockRows = Math.Max(1, BlockBytes / size);
        for (int start = 0; start < rows; start += blockRows)
        {
            int n = Math.Min(blockRows, rows - start);
            if (codes.Capacity < start + n)
            {
                codes.Resize(reader.LengthKnown ? rows : (int)Math.Min(rows, Math.Max(start + n, 2L * codes.Capacity)));
            }

            reader.Read(MemoryMarshal.CreateSpan(ref codes.Row(start), n * size));
        }
    }
}
