using VectorKit.Indexes;
using VectorKit.Internal;

namespace VectorKit.Persistence;

/// <summary>
/// Saves and loads one index kind: its header fields and its sections. A new index kind plugs in by adding a codec
/// (with a new <see cref="IndexKind"/> value and new <see cref="SectionId"/> numbers) and registering it in
/// <see cref="IndexCodecs"/>; the file layout, checksums, caps and atomic saving are shared.
/// </summary>
internal abstract class IndexCodec
{
    /// <summary>The kind this codec writes into the header and answers for on load.</summary>
    public abstract IndexKind Kind { get; }

    /// <summary>The concrete index type this codec saves and loads.</summary>
    public abstract Type IndexType { get; }

    /// <summary>
    /// Writes the header and every section of <paramref name="index"/>, holding whatever lock gives the index a
    /// consistent state for the duration.
    /// </summary>
    public abstract void Save(IVectorIndex index, IndexFileWriter writer);

    /// <summary>
    /// Reads the sections after the header was verified (common fields: dimension, counts, metric, section sizes
    /// against the file length) and returns the working index; anything invalid raises <see cref="IndexFileException"/>.
    /// </summary>
    public abstract IVectorIndex Load(IndexHeader header, IndexFileReader reader);

    // The compressed kinds' field for where re-scoring reads full vectors. Written only for an external source
    // (absent: in the index's memory), so in-memory files keep their bytes.
    private const string FullVectorLocationField = "full-vector-location";

    /// <summary>Records <paramref name="location"/> in the header when it is not the default (in the index's memory).</summary>
    protected static void WriteFullVectorLocation(IndexHeader header, FullVectorLocation location)
    {
        if (location != FullVectorLocation.InIndexMemory)
        {
            header.Integers[FullVectorLocationField] = (int)location;
        }
    }

    /// <summary>The recorded location: in the index's memory when the field is absent (every file written before it existed).</summary>
    protected static FullVectorLocation ReadFullVectorLocation(IndexHeader header)
        => header.Integers.ContainsKey(FullVectorLocationField)
            ? (FullVectorLocation)header.Integer(FullVectorLocationField, (int)FullVectorLocation.InIndexMemory, (int)FullVectorLocation.ExternalSource)
            : FullVectorLocation.InIndexMemory;

    /// <summary>
    /// Lists the <see cref="SectionId.IdOrder"/> section last: rows by ascending id, so that a mapped file finds an id by
    /// binary search instead of hashing every id at open (exact index from format version 3, inverted file from 4, graph
    /// from 5).
    /// </summary>
    protected static void AddIdOrder(IndexHeader header, int count)
        => header.Sections.Add(new SectionEntry((uint)SectionId.IdOrder, 0, checked((long)count * sizeof(int))));

    /// <summary>
    /// Writes the <see cref="SectionId.IdOrder"/> section of the rows' <paramref name="ids"/>: every row, or with
    /// <paramref name="removed"/> (the graph's flags) the live rows only.
    /// </summary>
    protected static void WriteIdOrder(IndexFileWriter writer, ReadOnlySpan<long> ids, ReadOnlySpan<byte> removed = default)
    {
        int live = ids.Length;
        if (!removed.IsEmpty)
        {
            live -= ids.Length - removed.Count((byte)0);
        }

        // Native scratch: at 10⁶ ids, managed arrays would be large objects, whose allocation starts full collections.
        using var keyColumn = new Column<long>(live);
        using var orderColumn = new Column<int>(live);
        Span<long> keys = keyColumn.Rows(live);
        Span<int> order = orderColumn.Rows(live);
        for (int row = 0, at = 0; row < ids.Length; row++)
        {
            if (removed.IsEmpty || removed[row] == 0)
            {
                keys[at] = ids[row];
                order[at++] = row;
            }
        }

        keys.Sort(order);
        writer.BeginSection(SectionId.IdOrder);
        writer.Write<int>(order);
        writer.EndSection();
    }

    /// <summary>A loaded (not mapped) index hashes its ids anyway: the order, when listed, is read through its checksum and dropped.</summary>
    protected static void SkipIdOrder(IndexHeader header, IndexFileReader reader)
        => SkipIdOrder(header, reader, header.Rows);

    /// <summary>As <see cref="SkipIdOrder(IndexHeader, IndexFileReader)"/> for an order of <paramref name="entries"/> rows (the graph lists its live rows only).</summary>
    protected static void SkipIdOrder(IndexHeader header, IndexFileReader reader, long entries)
    {
        if (header.Sections.Exists(s => s.Id == (uint)SectionId.IdOrder))
        {
            reader.OpenSection(SectionId.IdOrder);
            reader.ExpectPayload(checked(entries * sizeof(int)));
            reader.SkipRest();
            reader.CloseSection();
        }
    }
}
