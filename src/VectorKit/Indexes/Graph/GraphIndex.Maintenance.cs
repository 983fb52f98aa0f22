using VectorKit.Distance;

namespace VectorKit.Indexes.Graph;

/// <summary>Removal with neighbour repair, compaction, and the structural checks tests use.</summary>
public sealed partial class GraphIndex
{
    /// <inheritdoc/>
    /// <remarks>As <see cref="RemoveRange"/> with one id; removing many at once is cheaper with that method.</remarks>
    public void Remove(long id) => RemoveRange([id]);

    /// <summary>Removes many items at once: one pass over the links repairs every list that pointed to any of them.</summary>
    /// <param name="ids">Ids present in the index, no repeats.</param>
    /// <remarks>
    /// <para>The items are hidden from results at once. Every list (on every layer) that linked to a removed item is
    /// chosen again by the neighbour-selection heuristic from its remaining links and the removed items' own links
    /// (and, through removed items, their links' links), so the graph stays navigable and no live node links to a
    /// removed one. The vectors keep their space until <see cref="Compact()"/>. Removing the entry point promotes the
    /// live node with the highest level. The call ends with the reachability pass described on
    /// <see cref="GraphIndex"/>.</para>
    /// <para>Cost: a pass over all link lists plus the re-selection of the affected lists, whatever the number of ids,
    /// so a batch costs about as much as a single removal. Exclusive: waits for running searches and adds.</para>
    /// <para>Validation is all or nothing: nothing is removed when an id is missing or repeated.</para>
    /// </remarks>
    /// <exception cref="ArgumentException">An id appears more than once.</exception>
    /// <exception cref="KeyNotFoundException">An id is not in the index.</exception>
    /// <exception cref="ObjectDisposedException">The index was disposed.</exception>
    public void RemoveRange(ReadOnlySpan<long> ids)
    {
        VectorChecks.CheckUniqueIds(ids);

        if (ids.IsEmpty)
        {
            return;
        }

        _lock.EnterWriteLock();
        try
        {
            ThrowIfDisposed();
            foreach (long id in ids)
            {
                if (!_slotOf.ContainsKey(id))
                {
                    ThrowHelper.ThrowIdNotFound(id);
                }
            }

            foreach (long id in ids)
            {
                _slotOf.Remove(id, out int slot);
                _removed[slot] = 1;
                _count--;
            }

            if (_removed[EntrySlot(_entry)] != 0)
            {
                ChooseNewEntry();
            }

            var action = new MaintenanceAction(this, unlink: true);
            GraphDispatch.Run<MaintenanceAction, int>(Metric, _path, ref action);
        }
        finally
        {
            _lock.ExitWriteLock();
        }
    }

    /// <summary>
    /// Rebuilds the graph from the live items only, in parallel, and shrinks every array to <see cref="Count"/> items:
    /// the space of removed items is released.
    /// </summary>
    /// <remarks>As <see cref="Compact(IProgress{int}, CancellationToken)"/> without progress or cancellation.</remarks>
    /// <exception cref="ObjectDisposedException">The index was disposed.</exception>
    public void Compact() => Compact(null, default);

    /// <summary>
    /// Rebuilds the graph from the live items only, in parallel, and shrinks every array to <see cref="Count"/> items:
    /// the space of removed items is released.
    /// </summary>
    /// <param name="progress">Optional; receives the number of items linked into the new graph so far, from worker threads.</param>
    /// <param name="cancellationToken">Abandons the rebuild; the index is then exactly as it was before the call.</param>
    /// <remarks>
    /// The new graph is built beside the old one and replaces it at the end, so a cancelled compaction changes nothing;
    /// the price is memory: until the swap, the live vectors and links exist twice. Costs about as much as building the
    /// index anew. Levels are drawn again from <see cref="GraphIndexOptions.Seed"/>, so the result does not depend on
    /// the history of adds and removes. Exclusive: waits for running searches and blocks new ones until it finishes.
    /// </remarks>
    /// <exception cref="OperationCanceledException">The token was cancelled; see <paramref name="cancellationToken"/>.</exception>
    /// <exception cref="ObjectDisposedException">The index was disposed.</exception>
    public void Compact(IProgress<int>? progress, CancellationToken cancellationToken)
    {
        _lock.EnterWriteLock();
        try
        {
            ThrowIfDisposed();
            cancellationToken.ThrowIfCancellationRequested();
            var rebuilt = new GraphIndex(Dimension, Metric, _options);
            int live = _count;
            try
            {
                rebuilt.StoreLiveRowsOf(this);
                if (live > 0)
                {
                    rebuilt.LinkAll(0, live, new bool[live], progress, cancellationToken);
                    rebuilt.RepairReachabilityLocked();
                }
            }
            catch
            {
                rebuilt.Dispose();
                throw;
            }

            // The rebuilt index hands its storage over; it is dropped without disposing what now belongs to this one.
            _vectors.Dispose();
            _vectors = rebuilt._vectors;
            _links = rebuilt._links;
            _ids = rebuilt._ids;
            _removed = rebuilt._removed;
            _slotOf = rebuilt._slotOf;
            _levelRandom = rebuilt._levelRandom;
            _used = rebuilt._used;
            _count = rebuilt._count;
            _orphansAttached += rebuilt._orphansAttached;
            Volatile.Write(ref _entry, rebuilt._entry);
        }
        finally
        {
            _lock.ExitWriteLock();
        }
    }

    // Copies the live rows (already normalised under cosine), ids and nothing else of `source` into this empty index,
    // in slot order, with exactly as much room as they need, and draws their levels. No other thread sees this index.
    private void StoreLiveRowsOf(GraphIndex source)
    {
        int live = source._count;
        _vectors.EnsureCapacity(live);
        _links.EnsureCapacity(live);
        _ids = new long[live];
        _removed = new byte[live];
        _slotOf.EnsureCapacity(live);
        int next = 0;
        for (int slot = 0; slot < source._used; slot++)
        {
            if (source._removed[slot] == 0)
            {
                source._vectors.RowSpan(slot).CopyTo(_vectors.RowSpan(next));
                _ids[next] = source._ids[slot];
                _slotOf.Add(_ids[next], next);
                _links.InitNode(next, DrawLevel());
                next++;
            }
        }

        _used = next;
        _count = next;
        _entry = next == 0 ? -1L & 0xFFFFFFFFL : Pack(0, _links.Level(0));
    }

    // Caller holds the write lock. Runs the reachability pass with the index's distance.
    private int RepairReachabilityLocked()
    {
        var action = new MaintenanceAction(this, unlink: false);
        return GraphDispatch.Run<MaintenanceAction, int>(Metric, _path, ref action);
    }

    // Runs under the write lock after an add batch (a short exclusive step after the shared linking phase).
    private void RepairReachabilityAfterAdd()
    {
        _lock.EnterWriteLock();
        try
        {
            if (!_disposed)
            {
                RepairReachabilityLocked();
            }
        }
        finally
        {
            _lock.ExitWriteLock();
        }
    }

    /// <summary>Removal repair and the reachability pass, with the distance resolved.</summary>
    private readonly struct MaintenanceAction(GraphIndex index, bool unlink) : IGraphAction<int>
    {
        public int Run<TDistance>()
            where TDistance : struct, IGraphDistance
        {
            if (unlink)
            {
                index.UnlinkRemoved<TDistance>();
            }

            return index.RepairReachability<TDistance>();
        }
    }

    // Caller holds the write lock; removed items are flagged. Re-selects every live list that links to a removed node.
    private void UnlinkRemoved<TDistance>()
        where TDistance : struct, IGraphDistance
    {
        using GraphScratch.Rental rental = GraphScratch.Rent();
        GraphScratch scratch = rental.Scratch;
        scratch.EnsureSizes(_options.LinksPerNode, _links.MaxLimit);
        for (int slot = 0; slot < _used; slot++)
        {
            if (_removed[slot] != 0)
            {
                continue;
            }

            for (int layer = _links.Level(slot); layer >= 0; layer--)
            {
                Span<int> block = _links.Block(slot, layer);
                int count = block[0];
                for (int i = 1; i <= count; i++)
                {
                    if (_removed[block[i]] != 0)
                    {
                        Relink<TDistance>(scratch, slot, layer);
                        break;
                    }
                }
            }
        }
    }

    // Chooses the list of `slot` on `layer` again with the heuristic. Candidates: its live links; for each removed link,
    // that node's live links; and when that leaves fewer candidates than the limit (many removed at once), the live
    // links of removed nodes one hop further.
    private void Relink<TDistance>(GraphScratch scratch, int slot, int layer)
        where TDistance : struct, IGraphDistance
    {
        Span<int> block = _links.Block(slot, layer);
        int count = block[0];
        int limit = _links.Limit(layer);
        VisitedSet seen = scratch.Visited;
        seen.Begin(_links.Capacity);
        seen.TryMark(slot);
        int n = 0;
        for (int i = 1; i <= count; i++)
        {
            int to = block[i];
            if (_removed[to] == 0)
            {
                AddCandidate<TDistance>(scratch, slot, to, ref n);
            }
        }

        for (int hops = 1; hops <= 2 && (hops == 1 || n < limit); hops++)
        {
            for (int i = 1; i <= count; i++)
            {
                int to = block[i];
                if (_removed[to] != 0)
                {
                    AddLiveLinksOf<TDistance>(scratch, slot, to, layer, hops, ref n);
                }
            }
        }

        // The nearest candidates are the ones the heuristic keeps; beyond the build width they only cost time.
        int considered = Math.Min(n, Math.Max(_options.BuildWidth, 2 * limit));
        Span<float> keys = scratch.RepairKeys.AsSpan(0, n);
        Span<int> slots = scratch.RepairSlots.AsSpan(0, n);
        keys.Sort(slots);
        Span<int> chosen = scratch.PruneChosen;
        int kept = SelectNeighbours<TDistance>(keys[..considered], slots[..considered], limit, chosen);
        chosen[..kept].CopyTo(block[1..]);
        block[0] = kept;
    }

    // Adds the live links of removed node `via` (hops 1), or of the removed nodes it links to (hops 2).
    private void AddLiveLinksOf<TDistance>(GraphScratch scratch, int slot, int via, int layer, int hops, ref int n)
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
                    AddCandidate<TDistance>(scratch, slot, to, ref n);
                }
            }
            else if (hops == 2 && _links.Level(to) >= layer)
            {
                AddLiveLinksOf<TDistance>(scratch, slot, to, layer, 1, ref n);
            }
        }
    }

    private void AddCandidate<TDistance>(GraphScratch scratch, int slot, int candidate, ref int n)
        where TDistance : struct, IGraphDistance
    {
        if (!scratch.Visited.TryMark(candidate))
        {
            return;
        }

        scratch.EnsureRepairSize(n + 1);
        scratch.RepairSlots[n] = candidate;
        scratch.RepairKeys[n] = TDistance.Between(ref _vectors.Row(slot), ref _vectors.Row(candidate), Dimension);
        n++;
    }

    // The safety net behind the invariant "every live node is reachable from the entry point on the bottom layer".
    // Pruning a full list can drop the last in-link of a node (clusters of exact duplicates do it readily), and a
    // repair after removals can do the same; this pass finds such nodes with a traversal from the entry point and
    // links each from a reached node near it. Caller holds the write lock. Returns the number of nodes attached.
    private int RepairReachability<TDistance>()
        where TDistance : struct, IGraphDistance
    {
        int entry = EntrySlot(_entry);
        if (_count == 0 || entry < 0)
        {
            return 0;
        }

        int used = _used;
        var reached = new bool[used];
        var stack = new Stack<int>();
        Spread(entry, reached, stack);
        int attached = 0;
        using GraphScratch.Rental rental = GraphScratch.Rent();
        GraphScratch scratch = rental.Scratch;
        scratch.EnsureSizes(_options.BuildWidth, _links.MaxLimit);

        // Attaching replaces a link only when the reached node's list is full; a node cut off that way is found by
        // the next round. Rounds beyond the first are rare; the bound only guards against a pathological cycle.
        for (int round = 0; round < 8; round++)
        {
            bool any = false;
            for (int slot = 0; slot < used; slot++)
            {
                if (_removed[slot] == 0 && !reached[slot])
                {
                    any = true;
                    Attach<TDistance>(scratch, slot, reached);
                    attached++;
                    Spread(slot, reached, stack);
                }
            }

            if (!any)
            {
                break;
            }

            Array.Clear(reached);
            Spread(entry, reached, stack);
        }

        _orphansAttached += attached;
        return attached;
    }

    // Marks every node reachable on the bottom layer from `start` (through removed nodes too).
    private void Spread(int start, bool[] reached, Stack<int> stack)
    {
        if (reached[start])
        {
            return;
        }

        reached[start] = true;
        stack.Push(start);
        while (stack.Count > 0)
        {
            Span<int> block = _links.Block(stack.Pop(), 0);
            for (int i = 1; i <= block[0]; i++)
            {
                int to = block[i];
                if (!reached[to])
                {
                    reached[to] = true;
                    stack.Push(to);
                }
            }
        }
    }

    // Links the unreached live node `orphan` from the nearest reached node with room on the bottom layer (found by a
    // search for the orphan's own vector); when every one found is full, the nearest one gives up a link, preferably
    // one the orphan itself links to, so that node stays reachable through the orphan.
    private void Attach<TDistance>(GraphScratch scratch, int orphan, bool[] reached)
        where TDistance : struct, IGraphDistance
    {
        int d = Dimension;
        ref float vector = ref _vectors.Row(orphan);
        long packed = _entry;
        int entry = EntrySlot(packed);
        float entryDistance = TDistance.Between(ref vector, ref _vectors.Row(entry), d);
        int start = Descend<TDistance>(ref vector, entry, ref entryDistance, EntryLevel(packed), 0);
        if (!reached[start])
        {
            start = entry;
            entryDistance = TDistance.Between(ref vector, ref _vectors.Row(entry), d);
        }

        StartWalk(scratch, start, entryDistance, null);
        scratch.Visited.TryMark(orphan);
        BeamSearch<TDistance>(ref vector, scratch, 0, _options.BuildWidth, null);
        int found = DrainSorted(scratch);
        int limit = _links.BottomLimit;
        int host = -1;
        for (int i = 0; i < found && host < 0; i++)
        {
            int candidate = scratch.SortedSlots[i];
            if (reached[candidate] && _links.Block(candidate, 0)[0] < limit)
            {
                host = candidate;
            }
        }

        if (host < 0)
        {
            host = found > 0 && reached[scratch.SortedSlots[0]] ? scratch.SortedSlots[0] : entry;
        }

        Span<int> own = _links.Block(orphan, 0);
        Span<int> block = _links.Block(host, 0);
        if (block[0] < limit)
        {
            block[block[0] + 1] = orphan;
            block[0]++;
        }
        else
        {
            int victim = block[0];
            for (int i = block[0]; i >= 1; i--)
            {
                if (ListContains(own, own[0], block[i]))
                {
                    victim = i;
                    break;
                }
            }

            int dropped = block[victim];
            block[victim] = orphan;
            if (!ListContains(own, own[0], dropped) && own[0] < limit && dropped != orphan)
            {
                own[own[0] + 1] = dropped;
                own[0]++;
            }
        }

        // An orphan without links of its own gets them too, so walks can leave it.
        if (own[0] == 0 && found > 0)
        {
            int kept = SelectNeighbours<TDistance>(scratch.SortedKeys.AsSpan(0, found), scratch.SortedSlots.AsSpan(0, found), limit, scratch.Chosen);
            scratch.Chosen.AsSpan(0, kept).CopyTo(own[1..]);
            own[0] = kept;
        }
    }

    /// <summary>How many unreached nodes the reachability pass has attached since the index was created (for tests).</summary>
    internal long OrphansAttached
    {
        get
        {
            _lock.EnterReadLock();
            try
            {
                return _orphansAttached;
            }
            finally
            {
                _lock.ExitReadLock();
            }
        }
    }

    // The live node with the highest level (the first such slot) becomes the entry point; none left: empty.
    private void ChooseNewEntry()
    {
        int best = -1, bestLevel = -1;
        for (int slot = 0; slot < _used; slot++)
        {
            if (_removed[slot] == 0 && _links.Level(slot) > bestLevel)
            {
                best = slot;
                bestLevel = _links.Level(slot);
            }
        }

        Volatile.Write(ref _entry, best < 0 ? -1L & 0xFFFFFFFFL : Pack(best, bestLevel));
    }

    /// <summary>The id of the entry point, or <see langword="null"/> when the index is empty (for tests).</summary>
    internal long? EntryPointId
    {
        get
        {
            _lock.EnterReadLock();
            try
            {
                int entry = EntrySlot(_entry);
                return entry < 0 || _count == 0 ? null : _ids[entry];
            }
            finally
            {
                _lock.ExitReadLock();
            }
        }
    }

    /// <summary>
    /// Checks the graph's structure and returns the problems found (empty when sound): no self links, no link to a
    /// slot out of range or to a node below that layer, no live node linking to a removed one, counts within limits,
    /// every live node reachable on the bottom layer from the entry point, the entry point live and on the top level.
    /// </summary>
    internal List<string> CheckInvariants()
    {
        var problems = new List<string>();
        _lock.EnterReadLock();
        try
        {
            int entry = EntrySlot(_entry);
            if (_count == 0)
            {
                if (entry >= 0 && _removed[entry] == 0)
                {
                    problems.Add("an empty index has a live entry point");
                }

                return problems;
            }

            if (entry < 0 || entry >= _used || _removed[entry] != 0)
            {
                problems.Add($"entry point {entry} is not a live node");
                return problems;
            }

            for (int slot = 0; slot < _used; slot++)
            {
                int level = _links.Level(slot);
                if (_removed[slot] == 0 && level > EntryLevel(_entry))
                {
                    problems.Add($"slot {slot} has level {level}, above the entry level {EntryLevel(_entry)}");
                }

                for (int layer = 0; layer <= level; layer++)
                {
                    Span<int> block = _links.Block(slot, layer);
                    if (block[0] < 0 || block[0] > _links.Limit(layer))
                    {
                        problems.Add($"slot {slot} layer {layer}: count {block[0]} outside [0, {_links.Limit(layer)}]");
                        continue;
                    }

                    for (int i = 1; i <= block[0]; i++)
                    {
                        int to = block[i];
                        if (to == slot)
                        {
                            problems.Add($"slot {slot} layer {layer}: links to itself");
                        }
                        else if (to < 0 || to >= _used)
                        {
                            problems.Add($"slot {slot} layer {layer}: link to {to}, outside [0, {_used})");
                        }
                        else if (_links.Level(to) < layer)
                        {
                            problems.Add($"slot {slot} layer {layer}: link to {to}, whose level is {_links.Level(to)}");
                        }
                        else if (_removed[slot] == 0 && _removed[to] != 0)
                        {
                            problems.Add($"live slot {slot} layer {layer}: link to removed slot {to}");
                        }
                    }
                }
            }

            var reached = new bool[_used];
            var stack = new Stack<int>();
            stack.Push(entry);
            reached[entry] = true;
            while (stack.Count > 0)
            {
                Span<int> block = _links.Block(stack.Pop(), 0);
                for (int i = 1; i <= block[0]; i++)
                {
                    if (!reached[block[i]])
                    {
                        reached[block[i]] = true;
                        stack.Push(block[i]);
                    }
                }
            }

            for (int slot = 0; slot < _used; slot++)
            {
                if (_removed[slot] == 0 && !reached[slot])
                {
                    problems.Add($"live slot {slot} (id {_ids[slot]}) is not reachable from the entry point");
                }
            }

            return problems;
        }
        finally
        {
            _lock.ExitReadLock();
        }
    }
}
