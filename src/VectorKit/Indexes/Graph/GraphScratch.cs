using VectorKit.Indexes;

namespace VectorKit.Indexes.Graph;

/// <summary>
/// One thread's working memory for graph walks: the visited set, the two beam heaps and the buffers of neighbour
/// selection. Pooled per thread: <see cref="Rent"/> takes the thread's instance (or a new one, if it is in use
/// further up the stack) and the rental's <c>Dispose</c> puts it back, so steady-state searches allocate nothing.
/// </summary>
internal sealed class GraphScratch
{
    [ThreadStatic]
    private static GraphScratch? t_cached;

    public VisitedSet Visited { get; } = new();

    /// <summary>Nodes still to expand, nearest first.</summary>
    public NodeHeap Candidates { get; } = new();

    /// <summary>The best nodes found, keyed by negated distance so the farthest is on top.</summary>
    public NodeHeap Results { get; } = new();

    /// <summary>Beam results sorted nearest first (distances, slots), and the neighbours chosen from them.</summary>
    public float[] SortedKeys { get; private set; } = [];

    public int[] SortedSlots { get; private set; } = [];

    public int[] Chosen { get; private set; } = [];

    /// <summary>A second set of buffers for pruning a neighbour's list while the first set is in use.</summary>
    public float[] PruneKeys { get; private set; } = [];

    public int[] PruneSlots { get; private set; } = [];

    public int[] PruneChosen { get; private set; } = [];

    public SearchHit[] Hits { get; private set; } = [];

    /// <summary>The unvisited neighbours of the node a beam search is expanding, measured as one batch.</summary>
    public int[] Pending { get; private set; } = [];

    /// <summary>Candidates for re-linking a list after removals; grows on demand.</summary>
    public float[] RepairKeys { get; private set; } = [];

    public int[] RepairSlots { get; private set; } = [];

    /// <summary>
    /// The walk that finds the lists naming removed nodes: its two frontiers and the lists found. Kept, with their
    /// room, so that a removal allocates nothing in steady state (a walk's frontier reaches tens of thousands of nodes).
    /// </summary>
    public List<int> Frontier { get; } = [];

    public List<int> NextFrontier { get; } = [];

    public HashSet<long> ListsFound { get; } = [];

    /// <summary>Nodes decoded from 8-bit codes to serve as queries (see <see cref="IGraphDistance.NodeAsQuery"/>), one row per place.</summary>
    public float[] Decoded { get; private set; } = [];

    public static Rental Rent()
    {
        GraphScratch scratch = t_cached ?? new GraphScratch();
        t_cached = null;
        return new Rental(scratch);
    }

    /// <summary>Makes every buffer hold at least <paramref name="width"/> beam entries and <paramref name="links"/> + 1 list entries.</summary>
    public void EnsureSizes(int width, int links)
    {
        int sorted = Math.Max(width, 2 * (links + 1));
        if (SortedKeys.Length < sorted)
        {
            SortedKeys = new float[sorted];
            SortedSlots = new int[sorted];
            Chosen = new int[sorted];
            Hits = new SearchHit[sorted];
        }

        if (Pending.Length < links + 1)
        {
            Pending = new int[links + 1];
        }

        if (PruneKeys.Length < 2 * (links + 1))
        {
            PruneKeys = new float[2 * (links + 1)];
            PruneSlots = new int[2 * (links + 1)];
            PruneChosen = new int[2 * (links + 1)];
        }
    }

    /// <summary>
    /// Place <paramref name="place"/> of the decoded rows, <paramref name="length"/> floats. The buffer is sized for all
    /// <paramref name="places"/> at the first call, so a row handed out earlier in the same operation stays valid.
    /// </summary>
    public Span<float> DecodePlace(int place, int length, int places)
    {
        if (Decoded.Length < places * length)
        {
            Decoded = new float[places * length];
        }

        return Decoded.AsSpan(place * length, length);
    }

    /// <summary>Makes the repair buffers hold at least <paramref name="count"/> candidates.</summary>
    public void EnsureRepairSize(int count)
    {
        if (RepairKeys.Length < count)
        {
            // Grown while candidates are being gathered: keep the ones already there.
            int size = Math.Max(Math.Max(count, 64), 2 * RepairKeys.Length);
            float[] keys = RepairKeys;
            int[] slots = RepairSlots;
            Array.Resize(ref keys, size);
            Array.Resize(ref slots, size);
            RepairKeys = keys;
            RepairSlots = slots;
        }
    }

    /// <summary>Returns the scratch to its thread's pool when disposed.</summary>
    public readonly struct Rental(GraphScratch scratch) : IDisposable
    {
        public GraphScratch Scratch { get; } = scratch;

        public void Dispose() => t_cached = Scratch;
    }
}
