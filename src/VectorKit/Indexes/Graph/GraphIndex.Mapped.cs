using VectorKit.Distance;
using VectorKit.Internal;
using VectorKit.Quantization;

namespace VectorKit.Indexes.Graph;

/// <summary>A graph index read in place from a mapped file (opened with <c>IndexFile.OpenMapped</c>).</summary>
public sealed partial class GraphIndex
{
    // The mapped file whose pages hold the ids, removal flags, links, rows and codes (null in memory); owned, unmapped
    // on Dispose after the buffers have let go of it.
    private IDisposable? _mapping;

    /// <summary>
    /// Whether the index reads a mapped file in place (opened with <c>IndexFile.OpenMapped</c>): searches and reads
    /// only; adds, replaces, removals, training and <see cref="Compact"/> throw <see cref="NotSupportedException"/>.
    /// </summary>
    public bool IsMapped => Volatile.Read(ref _mapping) is not null;

    /// <inheritdoc/>
    private protected override bool IsReadOnly => IsMapped;

    /// <summary>
    /// Builds a read-only graph over a mapped file's sections, taking ownership of <paramref name="mapping"/> and of
    /// the borrowed <paramref name="vectors"/> and <paramref name="codes"/> (all disposed on failure, or with the index).
    /// Nothing of the sections is copied, and without <paramref name="verify"/> nothing is read per slot when
    /// <paramref name="starts"/> is given (see <see cref="GraphLinks.Mapped"/>). With <paramref name="verify"/> the
    /// structure is checked as a load checks it (one pass over the links); without, a walk stays inside the file all the
    /// same: it passes over link targets outside the slots, and an upper layer a node lacks, or whose level or start is
    /// impossible, reads as empty.
    /// </summary>
    /// <param name="mapping">The mapped file.</param>
    /// <param name="options">The stored options.</param>
    /// <param name="dimension">Components per vector.</param>
    /// <param name="metric">The metric.</param>
    /// <param name="slots">Stored slots, live and removed.</param>
    /// <param name="count">Live items (checked against the flags only with <paramref name="verify"/>).</param>
    /// <param name="entry">The entry point's slot (-1 or below <paramref name="slots"/>) and level (at most <see cref="MaxNodeLevel"/>).</param>
    /// <param name="ids"><paramref name="slots"/> ids.</param>
    /// <param name="removed"><paramref name="slots"/> removal flags.</param>
    /// <param name="levels"><paramref name="slots"/> levels.</param>
    /// <param name="starts">Where each slot's upper-layer blocks start (format version 6; the caller has checked them against the levels when verifying), or null to build them from the levels.</param>
    /// <param name="bottom">The bottom-layer blocks of every slot.</param>
    /// <param name="upper">The upper-layer blocks, <paramref name="upperInts"/> ints.</param>
    /// <param name="upperInts">The upper-layer section's length in ints.</param>
    /// <param name="vectors">The float rows when the variant has them (borrowed), else null.</param>
    /// <param name="codes">The 8-bit codes under 8-bit storage (borrowed), else null.</param>
    /// <param name="ranges">The trained ranges under 8-bit storage, else null.</param>
    /// <param name="slotOf">The id lookup over the live slots.</param>
    /// <param name="verify">Whether to check the whole structure and the codes' padding.</param>
    /// <exception cref="InvalidDataException">The state violates an invariant that is checked.</exception>
    internal static unsafe GraphIndex FromMapped(
        IDisposable mapping, GraphIndexOptions options, int dimension, DistanceMetric metric, int slots, int count, (int Slot, int Level) entry,
        long* ids, byte* removed, byte* levels, int* starts, int* bottom, int* upper, long upperInts,
        VectorBuffer? vectors, CodeBuffer? codes, float[]? ranges, IdMap slotOf, bool verify)
    {
        GraphIndex index;
        try
        {
            index = new GraphIndex(dimension, metric, options);
        }
        catch
        {
            vectors?.Dispose();
            codes?.Dispose();
            mapping.Dispose();
            throw;
        }

        try
        {
            int bottomStride = options.EffectiveBottomLayerLinks + 1;
            int upperStride = options.LinksPerNode + 1;
            if (upperInts > int.MaxValue)
            {
                throw new InvalidDataException($"the upper-layer links hold {upperInts} ints, more than one index addresses");
            }

            var bottomLinks = new ReadOnlySpan<int>(bottom, checked(slots * bottomStride));
            var upperLinks = new ReadOnlySpan<int>(upper, (int)upperInts);
            GraphLinks links = GraphLinks.Mapped(options.LinksPerNode, options.EffectiveBottomLayerLinks, slots, levels, starts, MaxLevel, bottom, upper, upperInts);
            if (verify)
            {
                ValidateLinks(new StoredLinks(slots, count, new ReadOnlySpan<byte>(levels, slots), new ReadOnlySpan<byte>(removed, slots), bottomLinks, upperLinks, entry.Slot, entry.Level), bottomStride, upperStride);
                if (codes is not null)
                {
                    CheckCodePadding(codes, slots, dimension);
                }
            }

            if (codes is not null && ranges is null && slots > 0)
            {
                throw new InvalidDataException($"an untrained 8-bit graph stores no vectors, but it has {slots} slots");
            }

            if (ranges is not null)
            {
                index._scalar = ScalarQuantizer.FromRanges(ranges.AsSpan(0, dimension), ranges.AsSpan(dimension, dimension), dimension);
            }

            index._vectors?.Dispose();
            index._codes?.Dispose();
            index._ids.Dispose();
            index._removed.Dispose();
            index._vectors = vectors;
            index._codes = codes;
            index._ids = new IdColumn(0);
            index._ids.Borrow(ids, slots);
            index._removed = new Column<byte>(0);
            index._removed.Borrow(removed, slots);
            index._links = links;
            index._slotOf = slotOf;
            index._used = slots;
            index._count = count;
            index._entry = entry.Slot < 0 || count == 0 ? -1L & 0xFFFFFFFFL : Pack(entry.Slot, entry.Level);
            index._mapping = mapping;
            return index;
        }
        catch
        {
            // Until the swap the borrowed buffers and the mapping belong to the caller's arguments: free them either way.
            if (!ReferenceEquals(index._vectors, vectors))
            {
                vectors?.Dispose();
            }

            if (!ReferenceEquals(index._codes, codes))
            {
                codes?.Dispose();
            }

            if (index._mapping is null)
            {
                mapping.Dispose();
            }

            index.Dispose();
            throw;
        }
    }
}
