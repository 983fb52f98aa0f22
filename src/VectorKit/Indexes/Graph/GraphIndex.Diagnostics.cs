namespace VectorKit.Indexes.Graph;

/// <summary>Structural checks and counters, for tests.</summary>
public sealed partial class GraphIndex
{
    /// <summary>
    /// The global reachability pass runs once the changes since the last one reach <c>Count / FullPassDivisor</c>;
    /// 0 turns the amortised pass off (compaction and an overflow of local repair still run it). For tests.
    /// </summary>
    internal int FullPassDivisor { get; set; } = 8;

    /// <summary>Called by the global pass each time it has released the write lock after a step of changes (for tests).</summary>
    internal Action? BetweenPassSteps { get; set; }

    /// <summary>Called by a removal's repair each time it has released the write lock after a step of list writes (for tests).</summary>
    internal Action? BetweenRepairSteps { get; set; }

    /// <summary>Called by a compaction once it has copied the live items and before it links them, with no lock held (for tests).</summary>
    internal Action? DuringCompactionRebuild { get; set; }

    /// <summary>Called by an add batch between its exclusive store step and its linking (for tests).</summary>
    internal Action? AfterBatchStored { get; set; }

    /// <summary>Called by an add batch inside its read lock, before linking; for tests.</summary>
    internal Action? DuringLinking { get; set; }

    /// <summary>Replaces the options' filtered-scan fraction (0: always walk, 1: always scan); for tests and benchmarks.</summary>
    internal double? FilteredScanFractionOverride { get; set; }

    /// <summary>Nodes the global reachability pass has attached since the index was created (for tests).</summary>
    internal long OrphansAttached => ReadCounter(ref _orphansAttached);

    /// <summary>Nodes left without a bottom-layer in-link that were attached locally (for tests).</summary>
    internal long OrphansAttachedLocally => ReadCounter(ref _orphansAttachedLocally);

    /// <summary>How many times the global reachability pass has run (for tests).</summary>
    internal long FullPasses => ReadCounter(ref _fullPasses);

    /// <summary>Removals whose local walk did not find every list naming the removed node (for tests).</summary>
    internal long IncompleteRemovals => ReadCounter(ref _incompleteRemovals);

    /// <summary>Removed nodes kept as waypoints until the next global pass (for tests).</summary>
    internal int PendingWaypoints
    {
        get
        {
            _lock.EnterReadLock();
            try
            {
                return _waypoints.Count;
            }
            finally
            {
                _lock.ExitReadLock();
            }
        }
    }

    /// <summary>
    /// Runs the global reachability pass now and returns how many nodes it attached (for tests and benchmarks). As after
    /// a write: noted orphans are attached and the pass runs outside the write lock, which only its list writes take.
    /// </summary>
    internal int RunFullPass()
    {
        using (_writerGate.EnterRead())
        using (_lock.EnterWrite())
        {
            ThrowIfDisposed();
            FinishLocked([], 0, 0, forceFullPass: true, deferAttach: true);
        }

        AttachDueOrphans();
        return RunDueFullPass();
    }

    private long ReadCounter(ref long counter)
    {
        _lock.EnterReadLock();
        try
        {
            return counter;
        }
        finally
        {
            _lock.ExitReadLock();
        }
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
    /// slot out of range or to a node below that layer, no live node linking to a removed one (other than a waypoint
    /// awaiting the global pass), counts within limits,
    /// every in-degree count equal to the number of lists naming the node, every live node but the entry point named by
    /// a bottom-layer list, the entry point live and on the top level, and (when asked) every live node reachable on
    /// the bottom layer from the entry point.
    /// </summary>
    internal List<string> CheckInvariants(bool reachability = true)
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
                        else if (_removed[slot] == 0 && _removed[to] != 0 && !_waypoints.Contains(to))
                        {
                            problems.Add($"live slot {slot} layer {layer}: link to removed slot {to}");
                        }
                    }
                }
            }

            var named = new Dictionary<(int Slot, int Layer), int>();
            for (int slot = 0; slot < _used; slot++)
            {
                for (int layer = 0; layer <= _links.Level(slot); layer++)
                {
                    Span<int> block = _links.Block(slot, layer);
                    for (int i = 1; i <= block[0]; i++)
                    {
                        named[(block[i], layer)] = named.GetValueOrDefault((block[i], layer)) + 1;
                    }
                }
            }

            for (int slot = 0; slot < _used; slot++)
            {
                for (int layer = 0; layer <= _links.Level(slot); layer++)
                {
                    int actual = named.GetValueOrDefault((slot, layer));
                    if (_links.InDegree(slot, layer) != actual)
                    {
                        problems.Add($"slot {slot} layer {layer}: in-degree count {_links.InDegree(slot, layer)}, but {actual} lists name it");
                    }
                }

                if (_removed[slot] == 0 && slot != entry && named.GetValueOrDefault((slot, 0)) == 0)
                {
                    problems.Add($"live slot {slot} (id {_ids[slot]}) has no in-link on the bottom layer");
                }
            }

            if (!reachability)
            {
                return problems;
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
