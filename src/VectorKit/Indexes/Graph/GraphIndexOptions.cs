using VectorKit.Internal;

namespace VectorKit.Indexes.Graph;

/// <summary>Options for building a <see cref="GraphIndex"/>.</summary>
/// <remarks>
/// Each property is checked when it is set; an out-of-range value throws an
/// <see cref="ArgumentOutOfRangeException"/> whose message names the option and its allowed range.
/// Instances are immutable once built and may be shared.
/// </remarks>
public sealed class GraphIndexOptions : VectorIndexOptions
{
    /// <summary>The most links a node may keep on one layer: the upper bound of <see cref="LinksPerNode"/> and <see cref="BottomLayerLinks"/>.</summary>
    public const int MaxLinks = 512;

    private readonly int _linksPerNode = 16;
    private readonly int? _bottomLayerLinks;
    private readonly int _buildWidth = 128;
    private readonly int _searchWidth = 64;
    private readonly int _initialCapacity;
    private readonly int _maxDegreeOfParallelism = -1;
    private readonly double? _filteredExactScanFraction;

    /// <summary>The defaults: 16 links per node (32 on the bottom layer), build width 128, search width 64, seed 42, float32 vectors.</summary>
    public static GraphIndexOptions Default { get; } = new();

    /// <summary>
    /// Links each node keeps on the upper layers, and the number of neighbours chosen for a new node on every layer
    /// (the published method's M). It also sets the level distribution: a node reaches level ℓ with probability
    /// <c>LinksPerNode^-ℓ</c>. Default 16; allowed 2 to <see cref="MaxLinks"/>. More links give higher recall at the
    /// cost of memory, build time and a slower walk per step; fewer links make a smaller, faster graph that misses more.
    /// </summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is outside [2, <see cref="MaxLinks"/>].</exception>
    public int LinksPerNode
    {
        get => _linksPerNode;
        init => _linksPerNode = OptionChecks.InRange(value, 2, MaxLinks, nameof(LinksPerNode));
    }

    /// <summary>
    /// Links each node may keep on the bottom layer, which holds every node and where most of a search's work happens.
    /// <see langword="null"/> (the default) means twice <see cref="LinksPerNode"/>, capped at <see cref="MaxLinks"/>;
    /// allowed 2 to <see cref="MaxLinks"/>. More links raise recall and cost memory and build time.
    /// </summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is outside [2, <see cref="MaxLinks"/>].</exception>
    public int? BottomLayerLinks
    {
        get => _bottomLayerLinks;
        init
        {
            if (value is { } v && (v < 2 || v > MaxLinks))
            {
                ThrowHelper.ThrowArgumentOutOfRange(nameof(BottomLayerLinks), v, $"must be in [2, {MaxLinks}]");
            }

            _bottomLayerLinks = value;
        }
    }

    /// <summary>
    /// Candidates kept by the beam search that finds a new node's neighbours. Default 128; allowed 1 to 100,000.
    /// Larger builds a better graph (higher recall at any search width) and makes adds slower; it does not change
    /// memory or search cost.
    /// </summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is outside [1, 100000].</exception>
    public int BuildWidth
    {
        get => _buildWidth;
        init => _buildWidth = OptionChecks.InRange(value, 1, 100_000, nameof(BuildWidth));
    }

    /// <summary>
    /// Candidates kept by a query's beam search when <see cref="SearchOptions.SearchWidth"/> is not given; a search
    /// for k results always keeps at least k. Default 64; allowed 1 to 100,000. Wider finds more of the true nearest
    /// items and makes each search slower, roughly in proportion.
    /// </summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is outside [1, 100000].</exception>
    public int SearchWidth
    {
        get => _searchWidth;
        init => _searchWidth = OptionChecks.InRange(value, 1, 100_000, nameof(SearchWidth));
    }

    /// <summary>
    /// Seed of the level draws: the same seed and the same insertion order give the same levels. Default 42; any value.
    /// It changes which graph is built, not its expected quality.
    /// </summary>
    public int Seed { get; init; } = 42;

    /// <summary>
    /// Vectors to reserve space for up front. Default 0; allowed 0 or more. Reserving the expected count avoids
    /// growing (and copying) the storage while adding, at the cost of holding that memory from the start.
    /// </summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is negative.</exception>
    public int InitialCapacity
    {
        get => _initialCapacity;
        init => _initialCapacity = OptionChecks.NonNegative(value, nameof(InitialCapacity));
    }

    /// <summary>
    /// The most threads a batch insert (and <see cref="GraphIndex.Compact"/>) uses. Default -1, meaning one per core;
    /// otherwise 1 or more. Fewer threads leave cores to concurrent work and make bulk builds slower.
    /// </summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is 0 or less than -1.</exception>
    public int MaxDegreeOfParallelism
    {
        get => _maxDegreeOfParallelism;
        init => _maxDegreeOfParallelism = OptionChecks.Parallelism(value, nameof(MaxDegreeOfParallelism));
    }

    /// <summary>
    /// When a search filter passes less than this fraction of the items (estimated from a fixed sample of 256 items),
    /// the search scans the passing items exactly instead of walking the graph. <see langword="null"/> (the default)
    /// chooses the fraction per search from a cost model; 0 never scans; 1 always scans; allowed 0 to 1. A higher
    /// fraction scans more often: exact results, but a cost that grows with the index.
    /// </summary>
    /// <remarks>
    /// The cost model: a filtered walk keeps going until its beam holds <c>width</c> passing items, so its cost grows
    /// as <c>1 / p</c> for a pass rate <c>p</c>, while the scan computes <c>p × Count</c> distances. The two meet at
    /// <c>p* = √(0.2 × width × bottom links / Count)</c>, so the threshold falls as the index grows. The constant was
    /// fitted on one data set (the filter-sweep benchmark; see benchmarks/README.md): set a fixed fraction when your
    /// own data says otherwise.
    /// </remarks>
    /// <exception cref="ArgumentOutOfRangeException">The value is outside [0, 1] or is NaN.</exception>
    public double? FilteredExactScanFraction
    {
        get => _filteredExactScanFraction;
        init
        {
            if (value is double fraction && !(fraction >= 0 && fraction <= 1))
            {
                ThrowHelper.ThrowArgumentOutOfRange(nameof(FilteredExactScanFraction), fraction, "must be in [0, 1], or null for the cost model");
            }

            _filteredExactScanFraction = value;
        }
    }

    /// <summary>The bottom layer's link limit after applying the default.</summary>
    internal int EffectiveBottomLayerLinks => _bottomLayerLinks ?? Math.Min(MaxLinks, 2 * _linksPerNode);

    internal int EffectiveParallelism => _maxDegreeOfParallelism == -1 ? Environment.ProcessorCount : _maxDegreeOfParallelism;
}
