using VectorKit.Distance;

namespace VectorKit.Indexes.Graph;

/// <summary>Removal with neighbour repair, compaction, and the structural checks tests use.</summary>
public sealed partial class GraphIndex
{
    /// <inheritdoc/>
    /// <remarks>
    /// The item is hidden from results at once. On every layer it was on, each neighbour that linked to it gets a new
    /// list chosen by the neighbour-selection heuristic from its remaining links and the removed item's links, so the
    /// graph stays navigable; the item's own vector and links stay as a waypoint for nodes that still point to it,
    /// until <see cref="Compact"/>. Removing the entry point promotes the live node with the highest level.
    /// </remarks>
    public void Remove(long id)
    {
        _lock.EnterWriteLock();
        try
        {
            ThrowIfDisposed();
            if (!_slotOf.Remove(id, out int slot))
            {
                ThrowHelper.ThrowIdNotFound(id);
            }

            _removed[slot] = 1;
            _count--;
            switch (Metric)
            {
                case DistanceMetric.SquaredEuclidean: Repair<SquaredEuclideanGraphDistance>(slot); break;
                case DistanceMetric.InnerProduct: Repair<InnerProductGraphDistance>(slot); break;
                default: Repair<CosineGraphDistance>(slot); break;
            }

            if (EntrySlot(_entry) == slot)
            {
                ChooseNewEntry();
            }
        }
        finally
        {
            _lock.ExitWriteLock();
        }
    }

    /// <summary>
    /// Rebuilds the graph from the live items only, in parallel, and shrinks every array to <see cref="Count"/> items:
    /// the space of removed items is released and no waypoint of a removed item remains.
    /// </summary>
    /// <remarks>
    /// Costs about as much as building the index anew (vectors are moved in place, not copied). Levels are drawn again
    /// from <see cref="GraphIndexOptions.Seed"/>, so the result does not depend on the history of adds and removes.
    /// Exclusive: waits for running searches and blocks new ones until it finishes.
    /// </remarks>
    /// <exception cref="ObjectDisposedException">The index was disposed.</exception>
    public void Compact()
    {
        _lock.EnterWriteLock();
        try
        {
            ThrowIfDisposed();
            int live = 0;
            for (int slot = 0; slot < _used; slot++)
            {
                if (_removed[slot] == 0)
                {
                    // Rows only move towards the front, so copying in ascending order never overwrites a pending row.
                    if (live != slot)
                    {
                        _vectors.CopyRow(slot, live);
                        _ids[live] = _ids[slot];
                    }

                    live++;
                }
            }

            _vectors.Resize(live);
            Array.Resize(ref _ids, live);
            _removed = new byte[live];
            _links.Reset(live);
            _slotOf.Clear();
            _slotOf.TrimExcess();
            _levelRandom = new Random(_options.Seed);
            _used = 0;
            _count = 0;
            Volatile.Write(ref _entry, -1L & 0xFFFFFFFFL);
            if (live == 0)
            {
                return;
            }

            long[] ids = _ids.AsSpan(0, live).ToArray();
            for (int slot = 0; slot < live; slot++)
            {
                _slotOf.Add(ids[slot], slot);
                _links.InitNode(slot, DrawLevel());
            }

            _used = live;
            _count = live;
            _entry = Pack(0, _links.Level(0));
            LinkAll(0, live, new bool[live], null, CancellationToken.None);
        }
        finally
        {
            _lock.ExitWriteLock();
        }
    }

    // Caller holds the write lock; `removed` is already flagged.
    private void Repair<TDistance>(int removed)
        where TDistance : struct, IGraphDistance
    {
        using GraphScratch.Rental rental = GraphScratch.Rent();
        GraphScratch scratch = rental.Scratch;
        scratch.EnsureSizes(_options.LinksPerNode, _links.BottomLimit);
        int d = Dimension;
        for (int layer = _links.Level(removed); layer >= 0; layer--)
        {
            Span<int> gone = _links.Block(removed, layer);
            int goneCount = gone[0];
            int limit = _links.Limit(layer);
            for (int g = 1; g <= goneCount; g++)
            {
                int neighbour = gone[g];
                if (_removed[neighbour] != 0)
                {
                    continue;
                }

                Span<int> block = _links.Block(neighbour, layer);
                int count = block[0];
                if (!ListContains(block, count, removed))
                {
                    continue;
                }

                // Candidates: the neighbour's other live links, then the removed item's live links, without repeats.
                scratch.Visited.Begin(_links.Capacity);
                scratch.Visited.TryMark(neighbour);
                scratch.Visited.TryMark(removed);
                Span<float> keys = scratch.PruneKeys;
                Span<int> slots = scratch.PruneSlots;
                int n = 0;
                ref float origin = ref _vectors.Row(neighbour);
                for (int source = 0; source < 2; source++)
                {
                    Span<int> from = source == 0 ? block : gone;
                    int fromCount = source == 0 ? count : goneCount;
                    for (int i = 1; i <= fromCount; i++)
                    {
                        int candidate = from[i];
                        if (_removed[candidate] == 0 && scratch.Visited.TryMark(candidate))
                        {
                            slots[n] = candidate;
                            keys[n] = TDistance.Between(ref origin, ref _vectors.Row(candidate), d);
                            n++;
                        }
                    }
                }

                keys[..n].Sort(slots[..n]);
                Span<int> chosen = scratch.PruneChosen;
                int kept = SelectNeighbours<TDistance>(keys[..n], slots[..n], limit, chosen);
                chosen[..kept].CopyTo(block[1..]);
                block[0] = kept;
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
    /// slot out of range or to a node below that layer, counts within limits, every live node reachable on the bottom
    /// layer from the entry point (through removed waypoints too), the entry point live and on the top level.
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
