namespace VectorKit.Indexes.Graph;

/// <summary>Options for building a <see cref="GraphIndex"/>.</summary>
/// <remarks>
/// Each property is checked when it is set; an out-of-range value throws an
/// <see cref="ArgumentOutOfRangeException"/> whose message names the option and its allowed range.
/// Instances are immutable once built and may be shared.
/// </remarks>
public sealed class GraphIndexOptions
{
    /// <summary>The most links a node may keep on one layer: the upper bound of <see cref="LinksPerNode"/> and <see cref="BottomLayerLinks"/>.</summary>
    public const int MaxLinks = 512;

    private readonly int _linksPerNode = 16;
    private readonly int? _bottomLayerLinks;
    private readonly int _buildWidth = 128;
    private readonly int _defaultSearchWidth = 64;
    private readonly int _initialCapacity;
    private readonly int _buildParallelism = -1;
    private readonly double? _filteredExactScanFraction;
    private readonly VectorStorage _storage = VectorStorage.Float32;
    private readonly int _rescoreDepth;
    private readonly FullVectorLocation _fullVectors = FullVectorLocation.InIndexMemory;

    /// <summary>The defaults: 16 links per node (32 on the bottom layer), build width 128, search width 64, seed 42, float32 vectors.</summary>
    public static GraphIndexOptions Default { get; } = new();

    /// <summary>
    /// Links each node keeps on the upper layers, and the number of neighbours chosen for a new node on every layer
    /// (the published method's M). It also sets the level distribution: a node reaches level ℓ with probability
    /// <c>LinksPerNode^-ℓ</c>. More links give higher recall and cost memory and build time. Default 16.
    /// </summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is outside [2, <see cref="MaxLinks"/>].</exception>
    public int LinksPerNode
    {
        get => _linksPerNode;
        init
        {
            if (value < 2 || value > MaxLinks)
            {
                ThrowHelper.ThrowArgumentOutOfRange(nameof(LinksPerNode), value, $"must be in [2, {MaxLinks}]");
            }

            _linksPerNode = value;
        }
    }

    /// <summary>
    /// Links each node may keep on the bottom layer, which holds every node; <see langword="null"/> (the default)
    /// means twice <see cref="LinksPerNode"/> (capped at <see cref="MaxLinks"/>).
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

    /// <summary>Candidates kept by the beam search that finds a new node's neighbours; larger builds a better graph, slower. Default 128.</summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is outside [1, 100000].</exception>
    public int BuildWidth
    {
        get => _buildWidth;
        init
        {
            if (value < 1 || value > 100_000)
            {
                ThrowHelper.ThrowArgumentOutOfRange(nameof(BuildWidth), value, "must be in [1, 100000]");
            }

            _buildWidth = value;
        }
    }

    /// <summary>
    /// Candidates kept by a query's beam search when <see cref="SearchOptions.SearchWidth"/> is not given; a search
    /// for k results always keeps at least k. Default 64.
    /// </summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is outside [1, 100000].</exception>
    public int DefaultSearchWidth
    {
        get => _defaultSearchWidth;
        init
        {
            if (value < 1 || value > 100_000)
            {
                ThrowHelper.ThrowArgumentOutOfRange(nameof(DefaultSearchWidth), value, "must be in [1, 100000]");
            }

            _defaultSearchWidth = value;
        }
    }

    /// <summary>Seed of the level draws: the same seed and the same insertion order give the same levels. Default 42.</summary>
    public int Seed { get; init; } = 42;

    /// <summary>Vectors to reserve space for up front. Default 0.</summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is negative.</exception>
    public int InitialCapacity
    {
        get => _initialCapacity;
        init
        {
            if (value < 0)
            {
                ThrowHelper.ThrowArgumentOutOfRange(nameof(InitialCapacity), value, "must be zero or positive");
            }

            _initialCapacity = value;
        }
    }

    /// <summary>The most threads a batch insert (and <see cref="GraphIndex.Compact()"/>) uses; -1 (the default) means one per core.</summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is 0 or less than -1.</exception>
    public int BuildParallelism
    {
        get => _buildParallelism;
        init
        {
            if (value == 0 || value < -1)
            {
                ThrowHelper.ThrowArgumentOutOfRange(nameof(BuildParallelism), value, "must be -1 (all cores) or a positive thread count");
            }

            _buildParallelism = value;
        }
    }

    /// <summary>
    /// When a search filter passes less than this fraction of the items (estimated from a fixed sample of 256 items),
    /// the search scans the passing items exactly instead of walking the graph. <see langword="null"/> (the default)
    /// chooses the fraction per search from a measured cost model; 0 never scans; 1 always scans.
    /// </summary>
    /// <remarks>
    /// <para>The cost model. A filtered walk keeps going until its beam holds <c>width</c> passing items, so its cost
    /// grows as <c>1 / p</c> for a pass rate <c>p</c>; the scan computes <c>p × Count</c> distances. The two meet at
    /// <c>p* = √(0.2 × width × bottom links / Count)</c>, the constant fitted to two runs of the <c>filter-sweep</c>
    /// benchmark on Fashion-MNIST (60,000 × 784, width 64, 32 bottom links: the walk is 2.5–3 times slower than the
    /// scan at 5 %, 1.4–1.7 times faster at 10 %; crossover near 8 %; see benchmarks/RESULTS.md). Below <c>p*</c>
    /// the scan is both faster and exact. For 10⁶ items at the defaults <c>p*</c> is about 2 %; for 10⁴ items about
    /// 20 %. One data set fitted the constant: treat it as a starting point and set a fixed fraction when a
    /// measurement on your own data says otherwise.</para>
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

    /// <summary>
    /// How the graph stores its vectors: <see cref="VectorStorage.Float32"/> (the default; exact distances) or
    /// <see cref="VectorStorage.Scalar8Bit"/> (one byte per component, a quarter of the memory; the index must be
    /// trained with <see cref="GraphIndex.Train"/> first, and every distance the graph computes is to decoded codes).
    /// </summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is not a defined <see cref="VectorStorage"/>.</exception>
    public VectorStorage Storage
    {
        get => _storage;
        init
        {
            if (value is not (VectorStorage.Float32 or VectorStorage.Scalar8Bit))
            {
                ThrowHelper.ThrowArgumentOutOfRange(nameof(Storage), value, "must be Float32 or Scalar8Bit");
            }

            _storage = value;
        }
    }

    /// <summary>
    /// Under <see cref="VectorStorage.Scalar8Bit"/>: a positive value keeps every full float32 vector (in memory beside
    /// its code, or in an external source: <see cref="FullVectors"/>), and each search re-scores that many of the walk's best candidates exactly on them (at least k; the walk
    /// then keeps at least this many); <see cref="SearchOptions.RescoreDepth"/> overrides it per search. 0 (the default) keeps
    /// no full vectors, so distances are the codes' approximations. Ignored under <see cref="VectorStorage.Float32"/>,
    /// which is exact already.
    /// </summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is negative or above 100000.</exception>
    public int RescoreDepth
    {
        get => _rescoreDepth;
        init
        {
            if (value < 0 || value > 100_000)
            {
                ThrowHelper.ThrowArgumentOutOfRange(nameof(RescoreDepth), value, "must be 0 (off) or in [1, 100000]");
            }

            _rescoreDepth = value;
        }
    }

    /// <summary>
    /// Where re-scoring (a positive <see cref="RescoreDepth"/> under <see cref="VectorStorage.Scalar8Bit"/>) reads full
    /// vectors: a copy kept in the index's memory (the default), or an <see cref="Indexes.IFullVectorSource"/> attached
    /// with <see cref="GraphIndex.AttachFullVectors"/>, such as a <c>VectorKit.IO.FileVectorSource</c> over the file the
    /// vectors came from. The external choice saves 4 × dimension bytes per vector of memory and of the index's file,
    /// at the cost of one read per re-scored candidate; the graph itself (walks, linking, removal repair,
    /// <see cref="GraphIndex.Compact()"/>) works on the codes either way. Ignored when re-scoring is off, and under
    /// <see cref="VectorStorage.Float32"/>, whose rows are the full vectors.
    /// </summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is not a defined <see cref="FullVectorLocation"/>.</exception>
    public FullVectorLocation FullVectors
    {
        get => _fullVectors;
        init
        {
            if (value is not (FullVectorLocation.InIndexMemory or FullVectorLocation.ExternalSource))
            {
                ThrowHelper.ThrowArgumentOutOfRange(nameof(FullVectors), value, "must be InIndexMemory or ExternalSource");
            }

            _fullVectors = value;
        }
    }

    /// <summary>The bottom layer's link limit after applying the default.</summary>
    internal int EffectiveBottomLayerLinks => _bottomLayerLinks ?? Math.Min(MaxLinks, 2 * _linksPerNode);

    internal int EffectiveBuildParallelism => _buildParallelism == -1 ? Environment.ProcessorCount : _buildParallelism;
}
