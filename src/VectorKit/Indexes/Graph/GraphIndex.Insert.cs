using System.Runtime.CompilerServices;
using VectorKit.Distance;

namespace VectorKit.Indexes.Graph;

/// <summary>Linking new items into the graph (the published Algorithm 1), in parallel with per-node locks.</summary>
public sealed partial class GraphIndex
{
    // Links slots [first, first + n) in parallel. Caller holds the read lock (adds) or the write lock (replacing,
    // compaction); the vectors are stored and the levels drawn.
    private void LinkAll(int first, int n, IProgress<int>? progress, CancellationToken cancellationToken)
    {
        if (n > 1 && _options.EffectiveParallelism > 1)
        {
            LinkAllInParallel(first, n, progress, cancellationToken);
            return;
        }

        // On the calling thread: a parallel loop's tasks and closures cost more than a single link.
        int step = Math.Max(1, n / 100);
        for (int i = 0; i < n; i++)
        {
            cancellationToken.ThrowIfCancellationRequested();
            Link(first + i);
            if (progress is not null && ((i + 1) % step == 0 || i + 1 == n))
            {
                progress.Report(i + 1);
            }
        }
    }

    // Apart from LinkAll: the loop's closure would be allocated on entry to any method declaring what it captures,
    // single adds included.
    private void LinkAllInParallel(int first, int n, IProgress<int>? progress, CancellationToken cancellationToken)
    {
        int completed = 0;
        int step = Math.Max(1, n / 100);
        var parallel = new ParallelOptions { MaxDegreeOfParallelism = _options.EffectiveParallelism, CancellationToken = cancellationToken };
        Parallel.For(0, n, parallel, i =>
        {
            Link(first + i);
            int done = Interlocked.Increment(ref completed);
            if (progress is not null && (done % step == 0 || done == n))
            {
                progress.Report(done);
            }
        });
    }

    private void Link(int slot)
    {
        var action = new LinkAction(this, slot);
        Dispatch<LinkAction, bool>(ref action);
    }

    private void Link<TDistance>(int slot)
        where TDistance : struct, IGraphDistance
    {
        long packed = Volatile.Read(ref _entry);
        int entry = EntrySlot(packed);
        if (entry == slot || entry < 0)
        {
            return;
        }

        int top = EntryLevel(packed);
        int level = _links.Level(slot);
        using GraphScratch.Rental rental = GraphScratch.Rent();
        GraphScratch scratch = rental.Scratch;
        int width = _options.BuildWidth;
        scratch.EnsureSizes(Math.Max(width, _options.LinksPerNode), _links.MaxLimit);
        ref float vector = ref TDistance.NodeAsQuery(this, slot, scratch, BasePlace);
        float entryDistance = TDistance.ToNode(this, ref vector, entry);
        entry = Descend<TDistance>(ref vector, entry, ref entryDistance, top, level);

        for (int layer = Math.Min(level, top); layer >= 0; layer--)
        {
            StartWalk(scratch, entry, entryDistance, null);

            // A concurrent insert may already link to this slot; it must never become its own neighbour.
            scratch.Visited.TryMark(slot);
            BeamSearch<TDistance>(ref vector, scratch, layer, width, null);
            int found = DrainSorted(scratch);
            if (found == 0)
            {
                continue;
            }

            Span<int> chosen = scratch.Chosen;
            int kept = SelectNeighbours<TDistance>(scratch, scratch.SortedKeys.AsSpan(0, found), scratch.SortedSlots.AsSpan(0, found), Math.Min(_options.LinksPerNode, _links.Limit(layer)), chosen);
            lock (StripeOf(slot))
            {
                SetList(slot, layer, chosen[..kept]);
            }

            for (int i = 0; i < kept; i++)
            {
                int neighbour = chosen[i];
                Connect<TDistance>(scratch, neighbour, slot, layer);
            }

            entry = scratch.SortedSlots[0];
            entryDistance = scratch.SortedKeys[0];
        }

        if (level > top)
        {
            lock (_entryLock)
            {
                long previous = Volatile.Read(ref _entry);
                if (level > EntryLevel(previous))
                {
                    Volatile.Write(ref _entry, Pack(slot, level));

                    // The entry point needs no in-link, so its orphan notes were skipped: once demoted it may have none.
                    NoteOrphan(EntrySlot(previous));
                }
            }
        }
    }

    // Adds the back link neighbour → slot on one layer; a full list is pruned with the heuristic (Algorithm 1, line 15).
    // Not inlined: a distance loop keeps its own inlining budget for the kernel (see BeamSearch).
    [MethodImpl(MethodImplOptions.NoInlining)]
    private void Connect<TDistance>(GraphScratch scratch, int neighbour, int slot, int layer)
        where TDistance : struct, IGraphDistance
    {
        int limit = _links.Limit(layer);
        lock (StripeOf(neighbour))
        {
            Span<int> block = _links.Block(neighbour, layer);
            int count = block[0];
            if (ListContains(block, count, slot))
            {
                return;
            }

            if (count < limit)
            {
                AppendLink(block, layer, slot);
                return;
            }

            ref float origin = ref TDistance.NodeAsQuery(this, neighbour, scratch, OriginPlace);
            Span<float> keys = scratch.PruneKeys.AsSpan(0, count + 1);
            Span<int> slots = scratch.PruneSlots.AsSpan(0, count + 1);
            for (int i = 0; i < count; i++)
            {
                slots[i] = block[i + 1];
                keys[i] = TDistance.ToNode(this, ref origin, slots[i]);
            }

            slots[count] = slot;
            keys[count] = TDistance.ToNode(this, ref origin, slot);
            keys.Sort(slots);
            Span<int> chosen = scratch.PruneChosen;
            int kept = SelectNeighbours<TDistance>(scratch, keys, slots, limit, chosen);
            SetList(neighbour, layer, chosen[..kept]);
        }
    }

    private readonly struct LinkAction(GraphIndex index, int slot) : IGraphAction<bool>
    {
        public bool Run<TDistance>()
            where TDistance : struct, IGraphDistance
        {
            index.Link<TDistance>(slot);
            return true;
        }
    }
}
