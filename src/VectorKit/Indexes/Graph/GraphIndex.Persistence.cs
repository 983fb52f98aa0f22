using VectorKit.Distance;
using VectorKit.Quantization;
using VectorKit.Internal;

namespace VectorKit.Indexes.Graph;

/// <summary>
/// The graph's primary state for persistence (<see cref="GraphIndexParts"/>): exported under the writer gate, and
/// rebuilt into a working index by <see cref="FromParts"/>, the one place where derived structures are recomputed
/// after a load. Every structural invariant a walk relies on is verified there, so a crafted file cannot send a walk
/// outside its arrays.
/// </summary>
public sealed partial class GraphIndex
{
    /// <summary>The highest level a node can have.</summary>
    internal static int MaxNodeLevel => MaxLevel;

    /// <summary>
    /// Runs <paramref name="export"/> on a consistent copy of the primary state. Holds the writer gate exclusively for
    /// the whole call: every write, including the linking phase of an add, passes the gate, so nothing changes, while
    /// searches (which never touch the gate) proceed. The parts are views of the live storage, not copies (a save then
    /// allocates next to nothing, and starts no collection that would pause searches), valid during the call only and
    /// never to be modified; only links in another layout (a mapped file's) are copied.
    /// </summary>
    internal T ExportParts<T>(Func<GraphIndexParts, T> export)
    {
        _writerGate.EnterWriteLock();
        try
        {
            ThrowIfDisposed();
            int slots = _used;
            if (!_links.TryViewInFileLayout(slots, out ReadOnlyMemory<byte> levels, out ReadOnlyMemory<int> bottom, out ReadOnlyMemory<int> upper))
            {
                (levels, bottom, upper) = CopyLinksInFileLayout(slots);
            }

            long packed = _entry;
            float[]? ranges = _scalar?.ToRanges();

            var parts = new GraphIndexParts
            {
                Dimension = Dimension,
                Metric = Metric,
                Options = _options,
                Slots = slots,
                Count = _count,
                Ids = _ids.RowsMemory(slots),
                Removed = _removed.RowsMemory(slots),
                Levels = levels,
                BottomLinks = bottom,
                UpperLinks = upper,
                Vectors = _vectors,
                Codes = _codes,
                ScalarRanges = ranges,
                EntrySlot = EntrySlot(packed),
                EntryLevel = EntrySlot(packed) < 0 ? 0 : EntryLevel(packed),
            };
            return export(parts);
        }
        finally
        {
            _writerGate.ExitWriteLock();
        }
    }

    // The levels and lists in a file's layout, copied from links that are not in it.
    private (byte[] Levels, int[] Bottom, int[] Upper) CopyLinksInFileLayout(int slots)
    {
        int bottomStride = _links.BottomLimit + 1;
        int upperStride = _links.UpperLimit + 1;
        var levels = new byte[slots];
        var bottom = new int[checked(slots * bottomStride)];
        long upperLength = 0;
        for (int slot = 0; slot < slots; slot++)
        {
            int level = _links.Level(slot);
            levels[slot] = (byte)level;
            _links.Block(slot, 0).CopyTo(bottom.AsSpan(slot * bottomStride, bottomStride));
            upperLength += (long)level * upperStride;
        }

        var upper = new int[checked((int)upperLength)];
        int at = 0;
        for (int slot = 0; slot < slots; slot++)
        {
            for (int layer = 1; layer <= levels[slot]; layer++)
            {
                _links.Block(slot, layer).CopyTo(upper.AsSpan(at, upperStride));
                at += upperStride;
            }
        }

        return (levels, bottom, upper);
    }

    /// <summary>
    /// Builds a working index from loaded primary state (with no external full-vector source: one is attached after the
    /// load), taking ownership of its arrays, vector and code storage
    /// (disposed on failure). Verifies the structure first: levels within the cap, link counts within the limits, every link
    /// target a stored slot whose level reaches the layer, no live node linking a removed one, the entry point a live
    /// node on the top layer, live ids unique and the live count right. Then derives the id lookup.
    /// </summary>
    /// <remarks>
    /// Items added after a load draw their levels from a generator seeded with the options' seed and the slot count,
    /// so a loaded index grows deterministically, though not along the same draws the original would have made.
    /// Reachability of every live node from the entry point is not re-verified (a walk stays safe without it; the next
    /// add's reachability pass restores it).
    /// </remarks>
    /// <exception cref="InvalidDataException">The state violates an invariant; the message says which and where.</exception>
    internal static GraphIndex FromParts(GraphIndexParts parts)
    {
        int slots = parts.Slots;
        GraphIndexOptions options = parts.Options;
        int bottomLimit = options.EffectiveBottomLayerLinks;
        int upperLimit = options.LinksPerNode;
        int bottomStride = bottomLimit + 1;
        int upperStride = upperLimit + 1;
        var index = new GraphIndex(parts.Dimension, parts.Metric, options);
        try
        {
            Validate(parts, bottomStride, upperStride);
            ValidateRows(parts);
            if (parts.ScalarRanges is float[] ranges)
            {
                index._scalar = ScalarQuantizer.FromRanges(ranges.AsSpan(0, parts.Dimension), ranges.AsSpan(parts.Dimension, parts.Dimension), parts.Dimension);
            }

            index._vectors?.Dispose();
            index._codes?.Dispose();
            index._vectors = parts.Vectors;
            index._codes = parts.Codes;
            index._ids.Resize(slots);
            index._removed.Resize(slots);
            ReadOnlySpan<long> ids = parts.Ids.Span[..slots];
            ReadOnlySpan<byte> removed = parts.Removed.Span[..slots];
            ReadOnlySpan<byte> levels = parts.Levels.Span;
            ReadOnlySpan<int> bottom = parts.BottomLinks.Span;
            ReadOnlySpan<int> upper = parts.UpperLinks.Span;
            ids.CopyTo(index._ids.Rows(slots));
            removed.CopyTo(index._removed.Rows(slots));
            index._links.EnsureCapacity(slots);
            int at = 0;
            for (int slot = 0; slot < slots; slot++)
            {
                int level = levels[slot];
                index._links.InitNode(slot, level);
                bottom.Slice(slot * bottomStride, bottomStride).CopyTo(index._links.Block(slot, 0));
                for (int layer = 1; layer <= level; layer++)
                {
                    upper.Slice(at, upperStride).CopyTo(index._links.Block(slot, layer));
                    at += upperStride;
                }
            }

            var slotOf = new IdMap(parts.Count);
            for (int slot = 0; slot < slots; slot++)
            {
                if (removed[slot] == 0 && !slotOf.TryAdd(ids[slot], slot))
                {
                    throw new InvalidDataException($"id {ids[slot]} is live at slots {slotOf[ids[slot]]} and {slot}; ids must be unique");
                }
            }

            index._slotOf = slotOf;
            index._used = slots;
            index._count = parts.Count;
            index._levelRandom = new Random(unchecked(options.Seed ^ (slots * 31)));
            index._entry = parts.EntrySlot < 0 ? -1L & 0xFFFFFFFFL : Pack(parts.EntrySlot, parts.EntryLevel);
            index.RebuildDerivedLinkState(slots);
            return index;
        }
        catch
        {
            // Until the swap above, the rows belong to the caller's parts, not to the index: free them either way.
            if (!ReferenceEquals(index._vectors, parts.Vectors))
            {
                parts.Vectors?.Dispose();
            }

            if (!ReferenceEquals(index._codes, parts.Codes))
            {
                parts.Codes?.Dispose();
            }

            index.Dispose();
            throw;
        }
    }

    private static void Validate(GraphIndexParts parts, int bottomStride, int upperStride)
    {
        int slots = parts.Slots;
        if (parts.Levels.Length < slots || parts.Removed.Length < slots || parts.Ids.Length < slots
            || parts.BottomLinks.Length != (long)slots * bottomStride)
        {
            throw new InvalidDataException($"the arrays do not match the {slots} slots");
        }

        ValidateLinks(new StoredLinks(slots, parts.Count, parts.Levels.Span, parts.Removed.Span, parts.BottomLinks.Span, parts.UpperLinks.Span, parts.EntrySlot, parts.EntryLevel), bottomStride, upperStride);
    }

    /// <summary>The stored structure a walk relies on, as arrays of a load or a mapped file's sections.</summary>
    private readonly ref struct StoredLinks(int slots, int count, ReadOnlySpan<byte> levels, ReadOnlySpan<byte> removed, ReadOnlySpan<int> bottom, ReadOnlySpan<int> upper, int entrySlot, int entryLevel)
    {
        public readonly int Slots = slots;
        public readonly int Count = count;
        public readonly ReadOnlySpan<byte> Levels = levels;
        public readonly ReadOnlySpan<byte> Removed = removed;
        public readonly ReadOnlySpan<int> Bottom = bottom;
        public readonly ReadOnlySpan<int> Upper = upper;
        public readonly int EntrySlot = entrySlot;
        public readonly int EntryLevel = entryLevel;
    }

    // Levels within the cap, link counts within the limits, every link target a stored slot whose level reaches the
    // layer, no live node linking a removed one without links, the entry point a live node on the top layer, and the
    // live count right.
    private static void ValidateLinks(in StoredLinks parts, int bottomStride, int upperStride)
    {
        int slots = parts.Slots;
        ReadOnlySpan<byte> levels = parts.Levels;
        ReadOnlySpan<byte> removed = parts.Removed;
        long upperNeeded = 0;
        int live = 0;
        for (int slot = 0; slot < slots; slot++)
        {
            if (levels[slot] > MaxLevel)
            {
                throw new InvalidDataException($"slot {slot} has level {levels[slot]}; the most is {MaxLevel}");
            }

            if (removed[slot] > 1)
            {
                throw new InvalidDataException($"slot {slot} has removal flag {removed[slot]}; expected 0 or 1");
            }

            live += removed[slot] == 0 ? 1 : 0;
            upperNeeded += (long)levels[slot] * upperStride;
        }

        if (live != parts.Count)
        {
            throw new InvalidDataException($"{live} slots are live, but the count is {parts.Count}");
        }

        if (upperNeeded != parts.Upper.Length)
        {
            throw new InvalidDataException($"the upper-layer links hold {parts.Upper.Length} ints; the levels require {upperNeeded}");
        }

        // A removed slot that still has links is a waypoint (a removal whose in-links were not all found yet): live
        // lists may name it until the next global pass. A removed slot without links may not be named by a live list.
        var waypoint = new bool[slots];
        int upperAt = 0;
        for (int slot = 0; slot < slots; slot++)
        {
            bool linked = parts.Bottom[slot * bottomStride] != 0;
            for (int layer = 1; layer <= levels[slot]; layer++)
            {
                linked |= parts.Upper[upperAt] != 0;
                upperAt += upperStride;
            }

            waypoint[slot] = removed[slot] != 0 && linked;
        }

        int at = 0;
        for (int slot = 0; slot < slots; slot++)
        {
            CheckBlock(parts, parts.Bottom.Slice(slot * bottomStride, bottomStride), slot, 0, waypoint);
            for (int layer = 1; layer <= levels[slot]; layer++)
            {
                CheckBlock(parts, parts.Upper.Slice(at, upperStride), slot, layer, waypoint);
                at += upperStride;
            }
        }

        int entry = parts.EntrySlot;
        if (parts.Count == 0)
        {
            if (entry != -1 || parts.EntryLevel != 0)
            {
                throw new InvalidDataException($"the graph has no live items, yet its entry point is slot {entry} at level {parts.EntryLevel} (expected -1, 0)");
            }

            return;
        }

        if (entry < 0 || entry >= slots || removed[entry] != 0 || levels[entry] != parts.EntryLevel)
        {
            throw new InvalidDataException($"the entry point (slot {entry}, level {parts.EntryLevel}) is not a live slot of that level among the {slots} slots");
        }

        for (int slot = 0; slot < slots; slot++)
        {
            if (removed[slot] == 0 && levels[slot] > parts.EntryLevel)
            {
                throw new InvalidDataException($"slot {slot} has level {levels[slot]}, above the entry point's level {parts.EntryLevel}");
            }
        }
    }

    // The rows the options call for, each holding every slot, and ranges exactly when codes exist and are trained.
    private static void ValidateRows(GraphIndexParts parts)
    {
        GraphIndexOptions options = parts.Options;
        bool codes = options.Encoding == VectorEncoding.Scalar8Bit;
        bool external = options.FullVectors == FullVectorLocation.ExternalSource;
        bool full = !codes || (options.RescoreDepth > 0 && !external);
        if (full != parts.Vectors is not null || (parts.Vectors is not null && (parts.Vectors.Dimension != parts.Dimension || parts.Vectors.Capacity < parts.Slots)))
        {
            throw new InvalidDataException(full
                ? $"the {options.Encoding} graph (re-score depth {options.RescoreDepth}) needs float vectors for its {parts.Slots} slots"
                : $"the {options.Encoding} graph {(options.RescoreDepth > 0 && external ? "re-scoring from an external source" : "without re-scoring")} keeps no float vectors, yet some are given");
        }

        if (codes != parts.Codes is not null || (parts.Codes is not null && (parts.Codes.Dimension != ScalarQuantizer.PaddedLength(parts.Dimension) || parts.Codes.Capacity < parts.Slots)))
        {
            throw new InvalidDataException(codes
                ? $"the 8-bit graph needs {ScalarQuantizer.PaddedLength(parts.Dimension)}-byte codes for its {parts.Slots} slots"
                : "a float32 graph keeps no codes, yet some are given");
        }

        if (parts.ScalarRanges is not null && (!codes || parts.ScalarRanges.Length != 2 * parts.Dimension))
        {
            throw new InvalidDataException($"scalar ranges of {parts.ScalarRanges.Length} values do not fit a {options.Encoding} graph of dimension {parts.Dimension}");
        }

        if (codes && parts.ScalarRanges is null && parts.Slots > 0)
        {
            throw new InvalidDataException($"an untrained 8-bit graph stores no vectors, but it has {parts.Slots} slots");
        }

        if (parts.Codes is CodeBuffer stored)
        {
            CheckCodePadding(stored, parts.Slots, parts.Dimension);
        }
    }

    // The kernels read the padding against zero scales, so any value is harmless; non-zero padding means damage.
    private static void CheckCodePadding(CodeBuffer codes, int slots, int dimension)
    {
        for (int slot = 0; slot < slots; slot++)
        {
            if (codes.RowSpan(slot)[dimension..].IndexOfAnyExcept((byte)0) >= 0)
            {
                throw new InvalidDataException($"the code of slot {slot} has non-zero padding after its {dimension} bytes");
            }
        }
    }

    private static void CheckBlock(in StoredLinks parts, ReadOnlySpan<int> block, int slot, int layer, bool[] waypoint)
    {
        int count = block[0];
        if (count < 0 || count > block.Length - 1)
        {
            throw new InvalidDataException($"slot {slot} has {count} links on layer {layer}; expected 0 to {block.Length - 1}");
        }

        for (int i = 1; i <= count; i++)
        {
            int to = block[i];
            if ((uint)to >= (uint)parts.Slots)
            {
                throw new InvalidDataException($"slot {slot}, layer {layer}: link {i} points to slot {to}, outside [0, {parts.Slots})");
            }

            if (parts.Levels[to] < layer)
            {
                throw new InvalidDataException($"slot {slot}, layer {layer}: link {i} points to slot {to}, whose level {parts.Levels[to]} is below the layer");
            }

            if (to == slot)
            {
                throw new InvalidDataException($"slot {slot}, layer {layer}: link {i} points to the slot itself");
            }

            if (parts.Removed[slot] == 0 && parts.Removed[to] != 0 && !waypoint[to])
            {
                throw new InvalidDataException($"live slot {slot}, layer {layer}: link {i} points to removed slot {to}, which has no links of its own");
            }
        }
    }

    // After the links are copied in: in-degree counts, live nodes per level, waypoints (removed slots still linked),
    // and live nodes without a bottom-layer in-link noted for local repair at the next change. No other user yet.
    private void RebuildDerivedLinkState(int slots)
    {
        for (int slot = 0; slot < slots; slot++)
        {
            bool linked = false;
            for (int layer = _links.Level(slot); layer >= 0; layer--)
            {
                Span<int> block = _links.Block(slot, layer);
                linked |= block[0] != 0;
                for (int i = 1; i <= block[0]; i++)
                {
                    _links.InDegree(block[i], layer)++;
                }
            }

            if (_removed[slot] == 0)
            {
                _levelCounts[_links.Level(slot)]++;
            }
            else if (linked)
            {
                _waypoints.Add(slot);
            }
        }

        int entry = EntrySlot(_entry);
        for (int slot = 0; slot < slots; slot++)
        {
            if (_removed[slot] == 0 && slot != entry && _links.InDegree(slot, 0) == 0)
            {
                _orphanNotes.Add(slot);
            }
        }
    }
}
