using System.Runtime.CompilerServices;
using System.Runtime.InteropServices;
using VectorKit.Internal;

namespace VectorKit.Indexes.Graph;

/// <summary>The graph walks: greedy descent, beam search and neighbour selection.</summary>
public sealed partial class GraphIndex
{
    // Greedy descent (ef = 1) from level `from` down to, not including, level `to`: on each layer move to the nearest
    // neighbour while one is nearer.
    // Not inlined: a distance loop keeps its own inlining budget for the kernel (see BeamSearch).
    [MethodImpl(MethodImplOptions.NoInlining)]
    private int Descend<TDistance>(ref float query, int entry, ref float entryDistance, int from, int to)
        where TDistance : struct, IGraphDistance
    {
        for (int level = from; level > to; level--)
        {
            bool moved = true;
            while (moved)
            {
                moved = false;
                Span<int> block = _links.Block(entry, level);
                int count = GraphLinks.CountOf(block);
                for (int i = 1; i <= count; i++)
                {
                    int next = block[i];
                    if ((uint)next >= (uint)_links.Capacity)
                    {
                        continue;
                    }

                    float distance = TDistance.ToNode(this, ref query, next);
                    if (distance < entryDistance)
                    {
                        entryDistance = distance;
                        entry = next;
                        moved = true;
                    }
                }
            }
        }

        return entry;
    }

    // Beam search on one layer (the published Algorithm 2). The caller has started the visited set and put the entry
    // point in Candidates (and in Results if eligible). Leaves the best `width` eligible nodes in Results, keyed by
    // negated distance. Eligible: not removed and passing the filter; ineligible nodes are expanded all the same.
    // Not inlined (as every loop that measures distances): compiled as its own method it has its own inlining budget,
    // so the distance kernel's helpers always inline into the loop. Inlined into a caller that already inlined much (as
    // profile-guided recompilation does), the budget ran out and they became calls passing vectors through memory.
    [MethodImpl(MethodImplOptions.NoInlining)]
    private void BeamSearch<TDistance>(ref float query, GraphScratch scratch, int level, int width, Func<long, bool>? filter)
        where TDistance : struct, IGraphDistance
    {
        NodeHeap candidates = scratch.Candidates;
        NodeHeap results = scratch.Results;
        VisitedSet visited = scratch.Visited;
        ref int pending = ref MemoryMarshal.GetArrayDataReference(scratch.Pending);
        Column<byte> removed = _removed;
        IdColumn ids = _ids;
        uint slots = (uint)_links.Capacity;

        // Rows asked for ahead of the one being measured: about PrefetchBytes in flight, so short rows (codes) overlap
        // more of their memory latency than long ones, whose lines already keep the memory busy.
        int ahead = Math.Clamp(PrefetchBytes / TDistance.RowBytes(this), 1, 8);
        while (candidates.Count > 0)
        {
            float nearest = candidates.TopKey;
            if (results.Count >= width && nearest > -results.TopKey)
            {
                break;
            }

            int current = candidates.TopSlot;
            candidates.Pop();

            // The candidate after this one is usually expanded next: its list is on its way while this one's rows are measured.
            if (candidates.Count > 0)
            {
                Span<int> following = _links.Block(candidates.TopSlot, level);
                CachePrefetch.Lines(ref Unsafe.As<int, byte>(ref MemoryMarshal.GetReference(following)), following.Length * sizeof(int));
            }

            Span<int> block = _links.Block(current, level);
            int count = GraphLinks.CountOf(block);
            ref int links = ref MemoryMarshal.GetReference(block);

            // Collect the unvisited neighbours first, then measure them in a row: while one distance is computed the
            // next row is already on its way from memory (random rows are the walk's main cost, not arithmetic).
            int fresh = 0;
            for (int i = 1; i <= count; i++)
            {
                // A target outside the slots (only a damaged mapped file holds one) is passed over, never followed.
                int next = Unsafe.Add(ref links, i);
                if ((uint)next < slots && visited.TryMark(next))
                {
                    Unsafe.Add(ref pending, fresh++) = next;
                }
            }

            int primed = Math.Min(ahead, fresh);
            for (int j = 0; j < primed; j++)
            {
                TDistance.Prefetch(this, Unsafe.Add(ref pending, j));
            }

            for (int j = 0; j < fresh; j++)
            {
                int next = Unsafe.Add(ref pending, j);
                if (j + ahead < fresh)
                {
                    TDistance.Prefetch(this, Unsafe.Add(ref pending, j + ahead));
                }

                float distance = TDistance.ToNode(this, ref query, next);
                if (results.Count < width || distance < -results.TopKey)
                {
                    candidates.Push(distance, next);
                    if (removed[next] == 0 && (filter is null || filter(ids[next])))
                    {
                        results.Push(-distance, next);
                        if (results.Count > width)
                        {
                            results.Pop();
                        }
                    }
                }
            }
        }
    }

    // Starts a beam search from one entry point.
    private void StartWalk(GraphScratch scratch, int entry, float entryDistance, Func<long, bool>? filter)
    {
        scratch.Visited.Begin(_links.Capacity);
        scratch.Candidates.Clear();
        scratch.Results.Clear();
        scratch.Visited.TryMark(entry);
        scratch.Candidates.Push(entryDistance, entry);
        if (_removed[entry] == 0 && (filter is null || filter(_ids[entry])))
        {
            scratch.Results.Push(-entryDistance, entry);
        }
    }

    // Empties Results into SortedKeys/SortedSlots, nearest first; returns the count.
    private static int DrainSorted(GraphScratch scratch)
    {
        NodeHeap results = scratch.Results;
        int count = results.Count;
        float[] keys = scratch.SortedKeys;
        int[] slots = scratch.SortedSlots;
        for (int i = count - 1; i >= 0; i--)
        {
            keys[i] = -results.TopKey;
            slots[i] = results.TopSlot;
            results.Pop();
        }

        return count;
    }

    // `prepared` is what the rows are measured against (the query, padded under codes); `query` is re-scored.
    // Not inlined: its own method, so the heap operations of the descent's entry and the drain inline here.
    [MethodImpl(MethodImplOptions.NoInlining)]
    private int SearchGraph<TDistance>(ref float query, ref float prepared, Span<SearchHit> destination, int width, int depth, Func<long, bool>? filter)
        where TDistance : struct, IGraphDistance
    {
        long packed = Volatile.Read(ref _entry);
        int entry = EntrySlot(packed);
        if (entry < 0)
        {
            return 0;
        }

        float topDistance = TDistance.ToNode(this, ref prepared, entry);
        float entryDistance = topDistance;
        int start = Descend<TDistance>(ref prepared, entry, ref entryDistance, EntryLevel(packed), 0);
        using GraphScratch.Rental rental = GraphScratch.Rent();
        GraphScratch scratch = rental.Scratch;
        scratch.EnsureSizes(width, _links.MaxLimit);
        StartWalk(scratch, start, entryDistance, filter);

        // The entry point joins the candidates too: every live node is reachable from it (not necessarily from where
        // the descent ends), so a width covering the index finds every item. Being far, it is rarely expanded otherwise.
        if (start != entry && scratch.Visited.TryMark(entry))
        {
            scratch.Candidates.Push(topDistance, entry);
            if (_removed[entry] == 0 && (filter is null || filter(_ids[entry])))
            {
                scratch.Results.Push(-topDistance, entry);
                if (scratch.Results.Count > width)
                {
                    scratch.Results.Pop();
                }
            }
        }
        BeamSearch<TDistance>(ref prepared, scratch, 0, width, filter);

        int found = scratch.Results.Count;
        Span<SearchHit> hits = scratch.Hits.AsSpan(0, found);
        Span<int> hitSlots = scratch.SortedSlots.AsSpan(0, found);
        for (int i = found - 1; i >= 0; i--)
        {
            NodeHeap results = scratch.Results;
            hits[i] = new SearchHit(_ids[results.TopSlot], -results.TopKey);
            hitSlots[i] = results.TopSlot;
            results.Pop();
        }

        // Equal distances are ordered by id, as every index orders them; the slots follow their hits.
        hits.Sort(hitSlots);
        found = Rescore(ref query, hits, scratch.SortedSlots, destination.Length, depth);
        int written = Math.Min(destination.Length, found);
        hits[..written].CopyTo(destination);
        return written;
    }

    // The published neighbour-selection heuristic (Algorithm 4 with keepPrunedConnections, without extending the
    // candidates): walk the candidates nearest first and keep one only when it is nearer to the base than to every
    // kept one; then, if room is left, fill the list with the nearest discarded candidates. The fill matters: without
    // it, pruning can take every in-link of a node (clusters of duplicates do it at once) and leave it unreachable.
    // keys/slots hold the candidates sorted by distance to the base; writes up to `limit` slots into `chosen`.
    // Each kept node is turned into a query once (under codes: decoded once into its own scratch place, 2 + its
    // position) and measured against the later candidates' rows; distances are symmetric, so this is the published
    // test with the decoding paid per kept node rather than per candidate.
    // Not inlined: a distance loop keeps its own inlining budget for the kernel (see BeamSearch).
    [MethodImpl(MethodImplOptions.NoInlining)]
    private int SelectNeighbours<TDistance>(GraphScratch scratch, ReadOnlySpan<float> keys, ReadOnlySpan<int> slots, int limit, Span<int> chosen)
        where TDistance : struct, IGraphDistance
    {
        int kept = 0;
        for (int i = 0; i < slots.Length && kept < limit; i++)
        {
            int candidate = slots[i];
            bool good = true;
            for (int j = 0; j < kept; j++)
            {
                // Strictly nearer to the base, as published: an exact duplicate of a kept node is not kept by this pass
                // (ties would otherwise fill a list with copies and wall a cluster of duplicates off from the rest).
                if (TDistance.ToNode(this, ref TDistance.Prepared(this, chosen[j], scratch, KeptPlace + j), candidate) <= keys[i])
                {
                    good = false;
                    break;
                }
            }

            if (good)
            {
                TDistance.NodeAsQuery(this, candidate, scratch, KeptPlace + kept);
                chosen[kept++] = candidate;
            }
        }

        int diverse = kept;
        for (int i = 0; i < slots.Length && kept < limit; i++)
        {
            if (!chosen[..diverse].Contains(slots[i]))
            {
                chosen[kept++] = slots[i];
            }
        }

        return kept;
    }

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    private static bool ListContains(Span<int> block, int count, int slot)
    {
        return block.Slice(1, count).Contains(slot);
    }
}
