using System.Buffers;
using VectorKit.Internal;

namespace VectorKit.Indexes.Graph;

/// <summary>
/// Link-list writes that keep in-degrees, local repair of nodes that lost their last in-link, and the amortised
/// global reachability pass.
/// </summary>
public sealed partial class GraphIndex
{
    // Every list write goes through SetList or AppendLink so the in-degree counts stay exact. Caller holds the stripe
    // lock of `slot` or the write lock. Only nodes entering or leaving the list change their count (a pruned list keeps
    // most of its links, and each interlocked update is a cache line that parallel inserts contend for); a node named
    // by both the old and the new list is left alone, so it never reads as orphaned. Increments come before decrements.
    private void SetList(int slot, int layer, ReadOnlySpan<int> links)
    {
        Span<int> block = _links.Block(slot, layer);
        ReadOnlySpan<int> previous = block.Slice(1, block[0]);
        foreach (int to in links)
        {
            if (!previous.Contains(to))
            {
                Interlocked.Increment(ref _links.InDegree(to, layer));
            }
        }

        foreach (int from in previous)
        {
            if (!links.Contains(from))
            {
                DropInLink(from, layer);
            }
        }

        links.CopyTo(block[1..]);
        Volatile.Write(ref block[0], links.Length);
    }

    // Appends one link to a list with room. Caller holds the owner's stripe lock or the write lock.
    private void AppendLink(Span<int> block, int layer, int to)
    {
        int count = block[0];
        block[count + 1] = to;
        Interlocked.Increment(ref _links.InDegree(to, layer));
        Volatile.Write(ref block[0], count + 1);
    }

    private void DropInLink(int to, int layer)
    {
        if (Interlocked.Decrement(ref _links.InDegree(to, layer)) == 0 && layer == 0)
        {
            NoteOrphan(to);
        }
    }

    // Noted now, checked later (AttachNotedOrphans): a concurrent insert may link it again meanwhile.
    private void NoteOrphan(int slot)
    {
        lock (_orphanNotes)
        {
            _orphanNotes.Add(slot);
        }
    }

    // The last step of every add, removal and compaction; caller holds the write lock. Notes the new slots
    // [first, first + added) that have no in-link on the bottom layer and links every noted node still without one:
    // here, or when `deferAttach`, from AfterWrite once the write has left the write lock (AttachDueOrphans). Then marks
    // the global pass due once the changes since the last one reach 1/FullPassDivisor of the items, so its
    // O(items × links) cost is spread over at least that many changes. The pass itself runs when the write has left
    // the write lock (RunDueFullPass).
    private void FinishChanges<TDistance>(int first, int added, int changes, bool forceFullPass, bool deferAttach)
        where TDistance : struct, IGraphDistance
    {
        int entry = EntrySlot(_entry);
        if (_count == 0 || entry < 0)
        {
            lock (_orphanNotes)
            {
                _orphanNotes.Clear();
            }

            return;
        }

        for (int slot = first; slot < first + added; slot++)
        {
            if (_removed[slot] == 0 && slot != entry && _links.InDegree(slot, 0) == 0)
            {
                NoteOrphan(slot);
            }
        }

        bool overflow = false;
        if (deferAttach)
        {
            Volatile.Write(ref _attachDue, true);
        }
        else
        {
            overflow = AttachNotedOrphans<TDistance>(lockWrites: false);
        }

        _changesSinceFullPass += changes;
        if (forceFullPass || overflow || (FullPassDivisor > 0 && _changesSinceFullPass * FullPassDivisor >= _count))
        {
            _changesSinceFullPass = 0;
            Volatile.Write(ref _fullPassDue, true);
        }
    }

    // Links the orphans an add or a removal noted (FinishChanges with deferAttach), after the write has left both
    // locks. Holding the writer gate exclusively, nothing else changes the graph, so each orphan's host is searched for
    // beside searches and only the few list writes take the write lock.
    private void AttachDueOrphans()
    {
        if (!Volatile.Read(ref _attachDue))
        {
            return;
        }

        using var gate = _writerGate.EnterWrite();
        if (IsDisposed || !_attachDue)
        {
            return;
        }

        _attachDue = false;
        var action = new AttachAction(this);
        if (Dispatch<AttachAction, bool>(ref action))
        {
            Volatile.Write(ref _fullPassDue, true);
        }
    }

    // Runs the global pass when one is due, after a write has left both locks. It holds the writer gate exclusively,
    // so no other write (nor a save) starts meanwhile and the graph changes only through the pass itself: the
    // traversals read it without the write lock, beside searches, and every change is made under the write lock in
    // steps of a few lists. Each step leaves a state a finished write could have left (a removed node still named by
    // a list keeps its own lists, so walks pass through it), so a search between steps sees a sound graph.
    // Returns the number of nodes attached.
    private int RunDueFullPass()
    {
        if (!Volatile.Read(ref _fullPassDue))
        {
            return 0;
        }

        using var gate = _writerGate.EnterWrite();
        if (IsDisposed || !_fullPassDue)
        {
            return 0;
        }

        _fullPassDue = false;
        var action = new FullPassAction(this);
        return Dispatch<FullPassAction, int>(ref action);
    }

    /// <inheritdoc/>
    private protected override void AfterWrite()
    {
        RunPendingRepairs();
        AttachDueOrphans();
        RunDueFullPass();
    }

    // Attaches every noted node that is live, not the entry point and without a bottom-layer in-link. Attaching can
    // take a link from a full list and orphan another node, which is noted and handled in the next round; returns
    // true when the rounds ran out (the global pass then finishes the job). `lockWrites`: the caller holds the writer
    // gate exclusively and not the write lock, which each attach takes for its list writes only (see Attach);
    // otherwise the caller holds the write lock.
    private bool AttachNotedOrphans<TDistance>(bool lockWrites)
        where TDistance : struct, IGraphDistance
    {
        using GraphScratch.Rental rental = GraphScratch.Rent();
        GraphScratch scratch = rental.Scratch;
        scratch.EnsureSizes(_options.BuildWidth, _links.MaxLimit);
        for (int round = 0; round < 16; round++)
        {
            using ScratchRental<int> notes = TakeAll(_orphanNotes);
            Span<int> noted = notes.Span;
            if (noted.Length == 0)
            {
                return false;
            }

            noted.Sort();
            for (int i = 0; i < noted.Length; i++)
            {
                int slot = noted[i];
                if ((i > 0 && noted[i - 1] == slot) || _removed[slot] != 0 || slot == EntrySlot(_entry) || _links.InDegree(slot, 0) > 0)
                {
                    continue;
                }

                Attach<TDistance>(scratch, slot, null, lockWrites);
                _orphansAttachedLocally++;
            }
        }

        lock (_orphanNotes)
        {
            _orphanNotes.Clear();
        }

        return true;
    }

    // The global pass. First it repairs the lists still naming removed waypoints (removals whose local walk missed an
    // in-link). Then the safety net behind "every live node is reachable from the entry point on the bottom layer":
    // in-degrees catch a node that lost its last in-link at once, but not a group of nodes that only link to each
    // other; a traversal from the entry point finds those and links each from a reached node near it.
    // Caller holds the writer gate exclusively and not the write lock (see RunDueFullPass); the pass takes the write
    // lock for the list writes of each step only. Returns the number of nodes attached.
    private int RepairReachability<TDistance>()
        where TDistance : struct, IGraphDistance
    {
        int entry = EntrySlot(_entry);
        if (_count == 0 || entry < 0)
        {
            using var empty = _lock.EnterWrite();
            _fullPasses++;
            lock (_orphanNotes)
            {
                _orphanNotes.Clear();
            }

            return 0;
        }

        RetireWaypoints<TDistance>();
        int used = _used;

        // Pooled: a pass runs again and again on a large index, and fresh arrays of this size would come from the
        // large-object heap, whose allocations start full collections (which stop searches). Each node is pushed at
        // most once, so the stack needs a place per slot.
        bool[] reached = ArrayPool<bool>.Shared.Rent(used);
        int[] stack = ArrayPool<int>.Shared.Rent(used);
        int attached = 0;
        try
        {
            Array.Clear(reached, 0, used);
            Spread(entry, reached, stack);
            using GraphScratch.Rental rental = GraphScratch.Rent();
            GraphScratch scratch = rental.Scratch;
            scratch.EnsureSizes(_options.BuildWidth, _links.MaxLimit);

            // Attaching replaces a link only when the reached node's list is full; a node cut off that way is found by
            // the next round. Rounds beyond the first are rare; the bound only guards against a pathological cycle. The
            // traversals read the graph only, beside searches; each attach writes under a short write lock.
            for (int round = 0; round < 8; round++)
            {
                bool any = false;
                for (int slot = 0; slot < used; slot++)
                {
                    if (_removed[slot] == 0 && !reached[slot])
                    {
                        any = true;
                        Attach<TDistance>(scratch, slot, reached, lockWrites: true);
                        attached++;
                        Spread(slot, reached, stack);
                        BetweenPassSteps?.Invoke();
                    }
                }

                if (!any)
                {
                    break;
                }

                Array.Clear(reached, 0, used);
                Spread(entry, reached, stack);
            }
        }
        finally
        {
            ArrayPool<bool>.Shared.Return(reached);
            ArrayPool<int>.Shared.Return(stack);
        }

        // Attaching can leave a node without in-links that the pass then reached some other way: none is kept noted.
        using (_lock.EnterWrite())
        {
            lock (_orphanNotes)
            {
                _orphanNotes.Clear();
            }

            _orphansAttached += attached;
            _fullPasses++;
        }

        return attached;
    }

    /// <summary>Attaches the noted orphans with the index's distance; true when the rounds ran out.</summary>
    private readonly struct AttachAction(GraphIndex index) : IGraphAction<bool>
    {
        public bool Run<TDistance>()
            where TDistance : struct, IGraphDistance
            => index.AttachNotedOrphans<TDistance>(lockWrites: true);
    }

    /// <summary>Runs the global pass with the index's distance.</summary>
    private readonly struct FullPassAction(GraphIndex index) : IGraphAction<int>
    {
        public int Run<TDistance>()
            where TDistance : struct, IGraphDistance
            => index.RepairReachability<TDistance>();
    }

    // Marks every node reachable on the bottom layer from `start`.
    private void Spread(int start, bool[] reached, int[] stack)
    {
        if (reached[start])
        {
            return;
        }

        reached[start] = true;
        stack[0] = start;
        int depth = 1;
        while (depth > 0)
        {
            Span<int> block = _links.Block(stack[--depth], 0);
            for (int i = 1; i <= block[0]; i++)
            {
                int to = block[i];
                if (!reached[to])
                {
                    reached[to] = true;
                    stack[depth++] = to;
                }
            }
        }
    }

    // Links `orphan` from the nearest suitable node with room on the bottom layer (found by a search for the orphan's
    // own vector). Suitable: reached by the global pass (`reached` given), or else live and itself linked from
    // somewhere (or the entry point). When every one found is full, the nearest suitable one gives up a link,
    // preferably one the orphan itself links to, so that node stays reachable through the orphan. The caller holds the
    // write lock, or (`lockWrites`) the writer gate exclusively: the search then runs beside searches (nothing else
    // changes the graph) and the write lock is taken for the list writes only.
    private void Attach<TDistance>(GraphScratch scratch, int orphan, bool[]? reached, bool lockWrites)
        where TDistance : struct, IGraphDistance
    {
        ref float vector = ref TDistance.NodeAsQuery(this, orphan, scratch, BasePlace);
        long packed = _entry;
        int entry = EntrySlot(packed);
        float entryDistance = TDistance.ToNode(this, ref vector, entry);
        int start = Descend<TDistance>(ref vector, entry, ref entryDistance, EntryLevel(packed), 0);
        if (!IsAnchor(start, orphan, entry, reached))
        {
            start = entry;
            entryDistance = TDistance.ToNode(this, ref vector, entry);
        }

        StartWalk(scratch, start, entryDistance, null);
        scratch.Visited.TryMark(orphan);
        BeamSearch<TDistance>(ref vector, scratch, 0, _options.BuildWidth, null);
        int found = DrainSorted(scratch);
        // The nearest suitable node with room takes the orphan. Failing that, the nearest suitable node with a link it
        // can give up without cutting its target off: one the orphan itself links to (still reachable through the
        // orphan), or one whose target has another in-link. Failing that too, the nearest suitable node gives up its
        // last link, and the node it cut off is found again (by the next round or the next note).
        int limit = _links.BottomLimit;
        Span<int> own = _links.Block(orphan, 0);
        int host = -1, victim = -1, fallback = -1;
        for (int i = 0; i < found; i++)
        {
            int candidate = scratch.SortedSlots[i];
            if (!IsAnchor(candidate, orphan, entry, reached))
            {
                continue;
            }

            Span<int> list = _links.Block(candidate, 0);
            if (list[0] < limit)
            {
                // Room further out beats a spare link nearer: a target's other in-links may all come from its own
                // group, so giving the link up can cut that group off, and two groups then trade places every round.
                host = candidate;
                victim = -1;
                break;
            }

            fallback = fallback < 0 ? candidate : fallback;
            int spare = victim < 0 ? SpareLink(list, own) : 0;
            if (spare > 0)
            {
                host = candidate;
                victim = spare;
            }
        }

        if (host < 0)
        {
            host = fallback >= 0 ? fallback : entry;
        }

        // An orphan without links of its own gets them too, so walks can leave it (chosen here, written below).
        int kept = own[0] == 0 && found > 0
            ? SelectNeighbours<TDistance>(scratch, scratch.SortedKeys.AsSpan(0, found), scratch.SortedSlots.AsSpan(0, found), limit, scratch.Chosen)
            : 0;
        if (lockWrites)
        {
            _lock.EnterWriteLock();
        }

        try
        {
            Span<int> block = _links.Block(host, 0);
            if (block[0] < limit)
            {
                AppendLink(block, 0, orphan);
            }
            else
            {
                victim = victim > 0 ? victim : SpareLink(block, own) is int spare && spare > 0 ? spare : block[0];
                int dropped = block[victim];
                if (!ListContains(own, own[0], dropped) && own[0] < limit && dropped != orphan)
                {
                    AppendLink(own, 0, dropped);
                }

                block[victim] = orphan;
                Interlocked.Increment(ref _links.InDegree(orphan, 0));
                DropInLink(dropped, 0);
            }

            if (own[0] == 0 && kept > 0)
            {
                SetList(orphan, 0, scratch.Chosen.AsSpan(0, kept));
            }
        }
        finally
        {
            if (lockWrites)
            {
                _lock.ExitWriteLock();
            }
        }
    }

    // The position (1-based) of a link in a full list that can be given up without cutting its target off: one the
    // orphan's own list names, else one whose target has another in-link; 0 when there is none.
    private int SpareLink(Span<int> list, Span<int> own)
    {
        for (int i = list[0]; i >= 1; i--)
        {
            if (ListContains(own, own[0], list[i]))
            {
                return i;
            }
        }

        for (int i = list[0]; i >= 1; i--)
        {
            if (_links.InDegree(list[i], 0) >= 2)
            {
                return i;
            }
        }

        return 0;
    }

    private bool IsAnchor(int candidate, int orphan, int entry, bool[]? reached)
    {
        if (candidate == orphan || _removed[candidate] != 0)
        {
            return false;
        }

        return reached is not null ? reached[candidate] : candidate == entry || _links.InDegree(candidate, 0) > 0;
    }

    /// <summary>Runs the last step of an add, removal or compaction with the index's distance.</summary>
    private readonly ref struct FinishAction(GraphIndex index, ReadOnlySpan<int> removed, int first, int added, bool forceFullPass, bool deferAttach) : IGraphAction<bool>
    {
        private readonly ReadOnlySpan<int> _removed = removed;

        public bool Run<TDistance>()
            where TDistance : struct, IGraphDistance
        {
            int changes = added;
            if (!_removed.IsEmpty)
            {
                index.RepairAfterRemoval<TDistance>(_removed);
                changes += _removed.Length;
            }

            index.FinishChanges<TDistance>(first, added, changes, forceFullPass, deferAttach);
            return true;
        }
    }

    // Caller holds the write lock; a global pass found due runs later, from AfterWrite, and so do the orphans' attaches
    // when `deferAttach`.
    private void FinishLocked(ReadOnlySpan<int> removed, int first, int added, bool forceFullPass, bool deferAttach = false)
    {
        var action = new FinishAction(this, removed, first, added, forceFullPass, deferAttach);
        Dispatch<FinishAction, bool>(ref action);
    }

    // Runs under the write lock after an add batch (a short exclusive step after the shared linking phase); the new
    // orphans are attached from AfterWrite.
    private void FinishAdd(int first, int added)
    {
        _lock.EnterWriteLock();
        try
        {
            if (!IsDisposed)
            {
                FinishLocked([], first, added, forceFullPass: false, deferAttach: true);
            }
        }
        finally
        {
            _lock.ExitWriteLock();
        }
    }
}
