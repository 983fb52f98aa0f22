using VectorKit.Indexes;
using VectorKit.Indexes.Exact;

namespace VectorKit.Storage;

/// <summary>The exact index: no kind-specific fields; sections <see cref="SectionId.Ids"/> and <see cref="SectionId.Vectors"/>.</summary>
internal sealed class ExactIndexCodec : IndexCodec
{
    public override IndexKind Kind => IndexKind.Exact;

    public override Type IndexType => typeof(ExactIndex);

    public override void Save(IVectorIndex index, IndexFileWriter writer)
    {
        var exact = (ExactIndex)index;
        exact.ExportParts((count, ids, vectors) =>
        {
            int d = exact.Dimension;
            var header = new IndexHeader { Kind = Kind, Metric = exact.Metric, Dimension = d, Count = count, Rows = count };
            header.Sections.Add(new SectionEntry((uint)SectionId.Ids, 0, checked((long)count * sizeof(long))));
            header.Sections.Add(new SectionEntry((uint)SectionId.Vectors, 0, checked((long)count * d * sizeof(float))));
            writer.WriteHeader(header);
            writer.BeginSection(SectionId.Ids);
            writer.Write<long>(ids.AsSpan(0, count));
            writer.EndSection();
            writer.BeginSection(SectionId.Vectors);
            StorageBlocks.WriteRows(writer, vectors, count);
            writer.EndSection();
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

        int n = (int)header.Rows;
        reader.OpenSection(SectionId.Ids);
        long[] ids = reader.ReadArray<long>(n);
        reader.CloseSection();
        reader.OpenSection(SectionId.Vectors);
        var vectors = new VectorBuffer(header.Dimension, 0);

        // Norms are derived block by block while the rows are still in cache, instead of in a second pass.
        float[]? norms = ExactIndex.KeepsSquaredNorms(header.Metric) ? GC.AllocateUninitializedArray<float>(n) : null;
        try
        {
            reader.ReadRows(vectors, n, norms is null ? null : (first, count) => ExactIndex.ComputeSquaredNorms(vectors, first, count, norms));
            reader.CloseSection();
        }
        catch
        {
            vectors.Dispose();
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
}
