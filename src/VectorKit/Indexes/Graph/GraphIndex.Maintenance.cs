using System.Reflection;
using System.Runtime.CompilerServices;
using System.Runtime.InteropServices;
using VectorKit.Distance;
using VectorKit.Internal;

namespace VectorKit.Indexes.Graph;

/// <summary>Removal with neighbour repair, compaction, and the structural checks tests use.</summary>
public sealed partial class GraphIndex
{
    // Hides the items at once (a removed item is never returned from here on) and queues their slots for repair, which
    // runs from AfterWrite once the write lock is released: see RunPendingRepairs and the class remarks, Writes.
    // Allocates nothing for a few ids: a collection started inside the write lock would keep searches waiting for it.
    private protected override void RemoveLocked(ReadOnlySpan<long> ids)
    {
        Span<int> slots = ids.Length <= 64 ? stackalloc int[ids.Length] : new int[ids.Length];
        for (int i = 0; i < ids.Length; i++)
        {
            _slotOf.Remove(ids[i], out slots[i]);
        }

        RetireLocked(slots);
        lock (_pendingRepairs)
        {
            _pendingRepairs.AddRange(slots);
        }
    }

    // The repair of removed slots, beside searches. Holding the writer gate exclusively, nothing but this thread changes
    // the graph (adds link under the gate too), so the lists naming the removed slots are found and chosen again
    // without the write lock, and only written under it, a few lists at a time; searches run in between. Until then
    // each removed slot is a waypoint in all but name: flagged, its lists intact, so walks still pass through it. The
    // slots of every removal queued so far are repaired together; a compaction's swap drops the queue (its slots name
    // the old graph), and so does disposal.
    private void RunPendingRepairs()
    {
        lock (_pendingRepairs)
        {
            if (_pendingRepairs.Count == 0)
            {
                return;
            }
        }

        using var gate = _writerGate.EnterWrite();
        using ScratchRental<int> slots = TakeAll(_pendingRepairs);
        if (slots.Span.Length == 0 || IsDisposed)
        {
            return;
        }

        var action = new SteppedRepairAction(this, slots.Span);
        Dispatch<SteppedRepairAction, bool>(ref action);
    }

    // Empties `list` (locked on itself) into a borrowed span the caller returns: a write's few slots allocate nothing.
    private static ScratchRental<int> TakeAll(List<int> list)
    {
        lock (list)
        {
            var taken = ScratchRental<int>.Rent(list.Count);
            CollectionsMarshal.AsSpan(list).CopyTo(taken.Span);
            list.Clear();
            return taken;
        }
    }

    // Caller holds the write lock and has taken the slots' ids out of the map: hides the slots from results (their
    // lists stay for the repair that follows) and moves the entry point off them.
    private void RetireLocked(ReadOnlySpan<int> slots)
    {
        foreach (int slot in slots)
        {
            _removed[slot] = 1;
            _levelCounts[_links.Level(slot)]--;
            _count--;
        }

        int entry = EntrySlot(_entry);
        if (entry >= 0 && _removed[entry] != 0)
        {
            ChooseNewEntry();
        }
    }

    /// <summary>
    /// Rebuilds the graph from the live items only, in parallel, and shrinks every array to about
    /// <see cref="VectorIndex.Count"/> items: the space of removed items is released.
    /// </summary>
    /// <param name="progress">Optional; receives the number of items linked into the new graph so far, from worker threads.</param>
    /// <param name="cancellationToken">Abandons the rebuild; the index is then exactly as it was before the call, with every write made meanwhile.</param>
    /// <remarks>
    /// The live items are copied in one short step that writes wait for; the new graph is then built from the copy
    /// beside searches and writes, which are recorded as they land. The new graph replays them, round after round, until
    /// few are left; the last round (writes wait for it) and the swap end the call. Searches run on the old graph all
    /// along and wait only for the swap. The price is memory: until the swap, the live vectors and links exist twice.
    /// Costs about as much as building the index anew. Levels are drawn again from <see cref="GraphIndexOptions.Seed"/>,
    /// so the result does not depend on the history of adds and removes. One compaction runs at a time; a second call
    /// waits for the first, and so does <see cref="Train"/>.
    /// </remarks>
    /// <exception cref="OperationCanceledException">The token was cancelled; see <paramref name="cancellationToken"/>.</exception>
    /// <exception cref="ObjectDisposedException">The index was disposed.</exception>
    public override void Compact(IProgress<int>? progress = null, CancellationToken cancellationToken = default)
    {
        // The swap runs under the write lock, and a method's first call compiles it: compiled here the first time.
        if (Interlocked.Exchange(ref s_swapPrepared, 1) == 0)
        {
            RuntimeHelpers.PrepareMethod(typeof(GraphIndex).GetMethod(nameof(AdoptGraphOf), BindingFlags.NonPublic | BindingFlags.Instance)!.MethodHandle);
        }

        using var compaction = _compaction.EnterScope(cancellationToken);
        GraphIndex rebuilt;
        using ChangeLog log = new();
        int live;

        // With the writer gate held exclusively no write is in flight, so the copy and the start of the log agree.
        using (_writerGate.EnterWrite())
        {
            ThrowIfDisposed();
            ThrowIfReadOnly();
            cancellationToken.ThrowIfCancellationRequested();
            rebuilt = new GraphIndex(Dimension, Metric, _options) { _scalar = _scalar };
            live = _count;
            try
            {
                rebuilt.StoreLiveRowsOf(this);
            }
            catch
            {
                rebuilt.Dispose();
                throw;
            }

            _changeLog = log;
        }

        try
        {
            DuringCompactionRebuild?.Invoke();
            if (live > 0)
            {
                rebuilt.LinkAll(0, live, progress, cancellationToken);
                rebuilt.FinishLocked([], 0, live, forceFullPass: true);
                rebuilt.RunDueFullPass();
            }

            // Catch up beside writes while they outpace nothing; each round replays what gathered during the last.
            for (int round = 0; round < CatchUpRounds && log.PendingIds > CatchUpTail; round++)
            {
                cancellationToken.ThrowIfCancellationRequested();
                ChangeLog.Replay(log.Take(), rebuilt);
            }

            cancellationToken.ThrowIfCancellationRequested();
            using (_writerGate.EnterWrite())
            {
                ThrowIfDisposed();
                ChangeLog.Replay(log.Take(), rebuilt);
                (VectorBuffer? oldVectors, CodeBuffer? oldCodes, IdColumn oldIds, Column<byte> oldRemoved) = (_vectors, _codes, _ids, _removed);
                using (_lock.EnterWrite())
                {
                    AdoptGraphOf(rebuilt);
                    _changeLog = null;
                }

                // Freed after the swap, outside the write lock: returning a large block to the system takes a while,
                // and no search can still read it (every search that could started before the swap and ended before it).
                oldVectors?.Dispose();
                oldCodes?.Dispose();
                oldIds.Dispose();
                oldRemoved.Dispose();
            }
        }
        catch
        {
            // Writes keep landing on this index, which stays complete; the log is dropped with the copy.
            Interlocked.CompareExchange(ref _changeLog, null, log);
            rebuilt.Dispose();
            throw;
        }
    }

    // Whether AdoptGraphOf has been compiled ahead of its first call (see Compact).
    private static int s_swapPrepared;

    // Caller holds the write lock; `rebuilt` is private to the caller and is dropped afterwards without being disposed,
    // its storage now belonging to this index. The caller frees the old storage once the lock is released.
    private void AdoptGraphOf(GraphIndex rebuilt)
    {
        _vectors = rebuilt._vectors;
        _codes = rebuilt._codes;
        _links = rebuilt._links;
        _ids = rebuilt._ids;
        _removed = rebuilt._removed;
        _slotOf = rebuilt._slotOf;
        _levelRandom = rebuilt._levelRandom;
        _used = rebuilt._used;
        _count = rebuilt._count;
        _levelCounts = rebuilt._levelCounts;
        _changesSinceFullPass = rebuilt._changesSinceFullPass;
        _fullPassDue = rebuilt._fullPassDue;

        // Waypoints, noted orphans and queued repairs name slots, so only the rebuilt graph's own (from the replayed
        // writes) carry over; a removal still waiting to repair finds nothing queued (the rebuilt graph lacks its items).
        _waypoints.Clear();
        _waypoints.AddRange(rebuilt._waypoints);
        lock (_orphanNotes)
        {
            _orphanNotes.Clear();
            _orphanNotes.AddRange(rebuilt._orphanNotes);
            _attachDue = _orphanNotes.Count > 0;
        }

        lock (_pendingRepairs)
        {
            _pendingRepairs.Clear();
        }

        _orphansAttached += rebuilt._orphansAttached;
        _orphansAttachedLocally += rebuilt._orphansAttachedLocally;
        _fullPasses += rebuilt._fullPasses;
        _incompleteRemovals += rebuilt._incompleteRemovals;
        Volatile.Write(ref _entry, rebuilt._entry);
    }

    // Copies the live rows (already normalised under cosine; codes as they are, the ranges being the same), ids and nothing else of `source` into this empty index,
    // in slot order, and draws their levels. No other thread sees this index. The room is the live count and a
    // sixteenth: the writes replayed from the rebuild's log then rarely grow every array by half (and the id map to
    // twice its size, a large allocation that starts a full collection) right before the swap.
    private void StoreLiveRowsOf(GraphIndex source)
    {
        int live = source._count;
        int room = (int)Math.Min(Array.MaxLength / (_links.BottomLimit + 1), live + Math.Max(64L, live / 16));
        EnsureRowCapacity(room);
        _links.EnsureCapacity(room);
        _ids.Resize(room);
        _removed.Resize(room);
        _removed.Rows(room).Clear();
        _slotOf.EnsureCapacity(room);
        int next = 0;
        for (int slot = 0; slot < source._used; slot++)
        {
            if (source._removed[slot] == 0)
            {
                if (_vectors is not null)
                {
                    source._vectors!.RowSpan(slot).CopyTo(_vectors.RowSpan(next));
                }

                if (_codes is not null)
                {
                    source._codes!.RowSpan(slot).CopyTo(_codes.RowSpan(next));
                }

                _ids[next] = source._ids[slot];
                _slotOf.Add(_ids[next], next);
                InitNode(next);
                next++;
            }
        }

        _used = next;
        _count = next;
        _entry = next == 0 ? -1L & 0xFFFFFFFFL : Pack(0, _links.Level(0));
    }

    // Caller holds the write lock; the removed slots are flagged and their lists intact. Finds the lists naming each
    // removed slot and chooses those of live nodes again. A removed slot whose in-links were all found loses its own
    // lists; one whose walk came back short keeps them (a waypoint for walks that still reach it through the links
    // not found) until the next global pass repairs the rest.
    private void RepairAfterRemoval<TDistance>(ReadOnlySpan<int> removed)
        where TDistance : struct, IGraphDistance
    {
        using GraphScratch.Rental rental = GraphScratch.Rent();
        GraphScratch scratch = rental.Scratch;
        scratch.EnsureSizes(_options.LinksPerNode, _links.MaxLimit);
        using var complete = ScratchRental<bool>.Rent(removed.Length);
        using ScratchRental<long> lists = ListsNaming(scratch, removed, complete.Span);
        foreach (long list in lists.Span)
        {
            Relink<TDistance>(scratch, (int)(list >> 8), (int)(list & 0xFF));
        }

        RetireLists(removed, complete.Span);
    }

    // RepairAfterRemoval in steps, for RunPendingRepairs (writer gate held exclusively, write lock not held): the lists
    // naming the removed slots are found outside the write lock and chosen again in steps (RelinkInSteps); the
    // orphans the new lists leave are attached from AfterWrite.
    private void RepairAfterRemovalInSteps<TDistance>(ReadOnlySpan<int> removed)
        where TDistance : struct, IGraphDistance
    {
        using var complete = ScratchRental<bool>.Rent(removed.Length);
        try
        {
            using GraphScratch.Rental rental = GraphScratch.Rent();
            GraphScratch scratch = rental.Scratch;
            scratch.EnsureSizes(_options.LinksPerNode, _links.MaxLimit);
            using ScratchRental<long> lists = ListsNaming(scratch, removed, complete.Span);
            RelinkInSteps<TDistance>(scratch, lists.Span, BetweenRepairSteps);
        }
        catch
        {
            // Whatever was not repaired is left to the global pass, as an incomplete removal is.
            using var write = _lock.EnterWrite();
            complete.Span.Clear();
            RetireLists(removed, complete.Span);
            throw;
        }

        using (_lock.EnterWrite())
        {
            RetireLists(removed, complete.Span);
            FinishChanges<TDistance>(0, 0, removed.Length, forceFullPass: false, deferAttach: true);
        }
    }

    // Chooses `lists` (keyed slot << 8 | layer) again and writes them: chosen outside the write lock, written under it
    // RelinkStep lists at a time, so searches run between the steps and wait at most for a step's copies. Caller holds
    // the writer gate exclusively and not the write lock, so nothing else changes the graph meanwhile; a new list
    // depends on its own old one and the removed nodes' lists only, so choosing a step's lists before writing them
    // gives the lists that choosing and writing each in turn would. `between` runs after each step (for tests).
    private void RelinkInSteps<TDistance>(GraphScratch scratch, ReadOnlySpan<long> lists, Action? between)
        where TDistance : struct, IGraphDistance
    {
        int stride = _links.MaxLimit;
        using var chosenRental = ScratchRental<int>.Rent(Math.Min(lists.Length, RelinkStep) * stride);
        using var keptRental = ScratchRental<int>.Rent(RelinkStep);
        Span<int> chosen = chosenRental.Span;
        Span<int> kept = keptRental.Span;
        for (int start = 0; start < lists.Length; start += RelinkStep)
        {
            int n = Math.Min(RelinkStep, lists.Length - start);
            for (int i = 0; i < n; i++)
            {
                long list = lists[start + i];
                kept[i] = ChooseAgain<TDistance>(scratch, (int)(list >> 8), (int)(list & 0xFF), chosen.Slice(i * stride, stride));
            }

            using (_lock.EnterWrite())
            {
                for (int i = 0; i < n; i++)
                {
                    long list = lists[start + i];
                    SetList((int)(list >> 8), (int)(list & 0xFF), chosen.Slice(i * stride, kept[i]));
                }
            }

            between?.Invoke();
        }
    }

    // The live lists (keyed slot << 8 | layer, sorted so the repaired graph does not depend on hash order) naming any of
    // `removed`, borrowed for the caller to return, and per removed slot whether its walk found every list naming it.
    private ScratchRental<long> ListsNaming(GraphScratch scratch, ReadOnlySpan<int> removed, Span<bool> complete)
    {
        HashSet<long> affected = scratch.ListsFound;
        affected.Clear();
        for (int r = 0; r < removed.Length; r++)
        {
            complete[r] = true;
            for (int layer = _links.Level(removed[r]); layer >= 0; layer--)
            {
                complete[r] &= FindInLinks(scratch.Visited, removed[r], layer, affected, scratch.Frontier, scratch.NextFrontier);
            }
        }

        var lists = ScratchRental<long>.Rent(affected.Count);
        int at = 0;
        foreach (long list in affected)
        {
            lists.Span[at++] = list;
        }

        affected.Clear();
        lists.Span.Sort();
        return lists;
    }

    // Caller holds the write lock and has chosen again every list found naming `removed`: a slot whose in-links were
    // all found loses its lists, the others stay as waypoints for the global pass.
    private void RetireLists(ReadOnlySpan<int> removed, ReadOnlySpan<bool> complete)
    {
        for (int r = 0; r < removed.Length; r++)
        {
            if (complete[r])
            {
                ClearLists(removed[r]);
            }
            else
            {
                _waypoints.Add(removed[r]);
                _incompleteRemovals++;
            }
        }
    }

    private void ClearLists(int slot)
    {
        for (int layer = _links.Level(slot); layer >= 0; layer--)
        {
            SetList(slot, layer, []);
        }
    }

    // Part of the global pass: every live list still naming a removed waypoint is chosen again, then the waypoints
    // lose their lists. Caller holds the writer gate exclusively and not the write lock: the lists to repair are
    // found without it (nothing else changes the graph) and chosen again in steps (RelinkInSteps); the waypoints keep
    // their lists until no live list names them, so walks between the steps still pass through them.
    private void RetireWaypoints<TDistance>()
        where TDistance : struct, IGraphDistance
    {
        if (_waypoints.Count == 0)
        {
            return;
        }

        List<long> lists = _waypointLists;
        lists.Clear();
        for (int slot = 0; slot < _used; slot++)
        {
            if (_removed[slot] != 0)
            {
                continue;
            }

            for (int layer = _links.Level(slot); layer >= 0; layer--)
            {
                Span<int> block = _links.Block(slot, layer);
                for (int i = 1; i <= block[0]; i++)
                {
                    if (_removed[block[i]] != 0)
                    {
                        lists.Add(((long)slot << 8) | (uint)layer);
                        break;
                    }
                }
            }
        }

        using GraphScratch.Rental rental = GraphScratch.Rent();
        GraphScratch scratch = rental.Scratch;
        scratch.EnsureSizes(_options.LinksPerNode, _links.MaxLimit);
        RelinkInSteps<TDistance>(scratch, CollectionsMarshal.AsSpan(lists), BetweenPassSteps);
        lists.Clear();
        ReadOnlySpan<int> waypoints = CollectionsMarshal.AsSpan(_waypoints);
        for (int start = 0; start < waypoints.Length; start += RelinkStep)
        {
            using (_lock.EnterWrite())
            {
                for (int i = start; i < Math.Min(waypoints.Length, start + RelinkStep); i++)
                {
                    ClearLists(waypoints[i]);
                }
            }

            BetweenPassSteps?.Invoke();
        }

        _waypoints.Clear();
    }

    // Adds to `affected` (keyed slot << 8 | layer) the live nodes whose list on `layer` names `removed`, and says
    // whether it found them all. Links are mostly mutual and short, so those nodes are near: a breadth-first walk of
    // up to three hops (and 4,096 nodes) from the removed node finds them, and stops once it has found as many as the
    // in-degree says. Measured on 20,000 clustered items: complete for about nine removals in ten; the rest miss one
    // or two long links that only a scan would find, so they are left to the amortised global pass.
    private bool FindInLinks(VisitedSet seen, int removed, int layer, HashSet<long> affected, List<int> frontier, List<int> next)
    {
        int expected = _links.InDegree(removed, layer);
        if (expected == 0)
        {
            return true;
        }

        int found = 0;
        seen.Begin(_links.Capacity);
        seen.TryMark(removed);
        frontier.Clear();
        frontier.Add(removed);
        int visited = 0;
        for (int hop = 0; hop < InLinkSearchHops && frontier.Count > 0; hop++)
        {
            next.Clear();
            foreach (int node in frontier)
            {
                Span<int> block = _links.Block(node, layer);
                int count = block[0];
                for (int i = 1; i <= count; i++)
                {
                    int to = block[i];
                    if (!seen.TryMark(to))
                    {
                        continue;
                    }

                    if (ListContains(_links.Block(to, layer), _links.Block(to, layer)[0], removed))
                    {
                        found++;
                        if (_removed[to] == 0)
                        {
                            affected.Add(((long)to << 8) | (uint)layer);
                        }

                        if (found == expected)
                        {
                            return true;
                        }
                    }

                    next.Add(to);
                    visited++;
                }
            }

            if (visited >= InLinkSearchNodes)
            {
                break;
            }

            (frontier, next) = (next, frontier);
        }

        return false;
    }

    // Chooses the list of `slot` on `layer` again with the heuristic (ChooseAgain) and writes it.
    private void Relink<TDistance>(GraphScratch scratch, int slot, int layer)
        where TDistance : struct, IGraphDistance
    {
        Span<int> chosen = scratch.PruneChosen;
        int kept = ChooseAgain<TDistance>(scratch, slot, layer, chosen);
        SetList(slot, layer, chosen[..kept]);
    }

    // The new list of `slot` on `layer`, written to `chosen` (room for the layer's limit); returns its length.
    // Candidates: its live links; for each removed link, that node's live links; and when that leaves fewer candidates
    // than the limit (many removed at once), the live links of removed nodes one hop further. Reads the graph only.
    private int ChooseAgain<TDistance>(GraphScratch scratch, int slot, int layer, Span<int> chosen)
        where TDistance : struct, IGraphDistance
    {
        Span<int> block = _links.Block(slot, layer);
        int count = block[0];
        int limit = _links.Limit(layer);
        ref float origin = ref TDistance.NodeAsQuery(this, slot, scratch, OriginPlace);
        VisitedSet seen = scratch.Visited;
        seen.Begin(_links.Capacity);
        seen.TryMark(slot);
        int n = 0;
        for (int i = 1; i <= count; i++)
        {
            int to = block[i];
            if (_removed[to] == 0)
            {
                AddCandidate<TDistance>(scratch, ref origin, to, ref n);
            }
        }

        for (int hops = 1; hops <= 2 && (hops == 1 || n < limit); hops++)
        {
            for (int i = 1; i <= count; i++)
            {
                int to = block[i];
                if (_removed[to] != 0)
                {
                    AddLiveLinksOf<TDistance>(scratch, ref origin, to, layer, hops, ref n);
                }
            }
        }

        // The nearest candidates are the ones the heuristic keeps; beyond the build width they only cost time.
        int considered = Math.Min(n, Math.Max(_options.BuildWidth, 2 * limit));
        Span<float> keys = scratch.RepairKeys.AsSpan(0, n);
        Span<int> slots = scratch.RepairSlots.AsSpan(0, n);
        keys.Sort(slots);
        return SelectNeighbours<TDistance>(scratch, keys[..considered], slots[..considered], limit, chosen);
    }

    // Adds the live links of removed node `via` (hops 1), or of the removed nodes it links to (hops 2).
    private void AddLiveLinksOf<TDistance>(GraphScratch scratch, ref float origin, int via, int layer, int hops, ref int n)
        where TDistance : struct, IGraphDistance
    {
        Span<int> from = _links.Block(via, layer);
        int count = from[0];
        for (int i = 1; i <= count; i++)
        {
            int to = from[i];
            if (_removed[to] == 0)
            {
                if (hops == 1)
                {
                    AddCandidate<TDistance>(scratch, ref origin, to, ref n);
                }
            }
            else if (hops == 2 && _links.Level(to) >= layer)
            {
                AddLiveLinksOf<TDistance>(scratch, ref origin, to, layer, 1, ref n);
            }
        }
    }

    // `origin` is the list owner's row as a query (NodeAsQuery).
    private void AddCandidate<TDistance>(GraphScratch scratch, ref float origin, int candidate, ref int n)
        where TDistance : struct, IGraphDistance
    {
        if (!scratch.Visited.TryMark(candidate))
        {
            return;
        }

        scratch.EnsureRepairSize(n + 1);
        scratch.RepairSlots[n] = candidate;
        scratch.RepairKeys[n] = TDistance.ToNode(this, ref origin, candidate);
        n++;
    }

    // A live node of the highest remaining level becomes the entry point; none left: empty. Caller holds the write
    // lock; the old entry point is flagged removed and its lists are intact. Nodes of that level are linked on that
    // layer, so a walk on it from the old entry point finds one; scanning every slot is the fallback.
    private void ChooseNewEntry()
    {
        int top = _levelCounts.Length - 1;
        while (top >= 0 && _levelCounts[top] == 0)
        {
            top--;
        }

        if (top < 0)
        {
            Volatile.Write(ref _entry, -1L & 0xFFFFFFFFL);
            return;
        }

        int old = EntrySlot(_entry);
        var queue = new Queue<int>();
        var seen = new HashSet<int> { old };
        queue.Enqueue(old);
        while (queue.Count > 0 && seen.Count < InLinkSearchNodes)
        {
            Span<int> block = _links.Block(queue.Dequeue(), top);
            for (int i = 1; i <= block[0]; i++)
            {
                int to = block[i];
                if (!seen.Add(to))
                {
                    continue;
                }

                if (_removed[to] == 0 && _links.Level(to) == top)
                {
                    Volatile.Write(ref _entry, Pack(to, top));
                    return;
                }

                queue.Enqueue(to);
            }
        }

        for (int slot = 0; slot < _used; slot++)
        {
            if (_removed[slot] == 0 && _links.Level(slot) == top)
            {
                Volatile.Write(ref _entry, Pack(slot, top));
                return;
            }
        }
    }

    /// <summary>Runs the stepped repair of removed slots with the index's distance.</summary>
    private readonly ref struct SteppedRepairAction(GraphIndex index, ReadOnlySpan<int> removed) : IGraphAction<bool>
    {
        private readonly ReadOnlySpan<int> _removed = removed;

        public bool Run<TDistance>()
            where TDistance : struct, IGraphDistance
        {
            index.RepairAfterRemovalInSteps<TDistance>(_removed);
            return true;
        }
    }
}
