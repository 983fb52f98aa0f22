using VectorKit.Internal;

namespace VectorKit.Indexes;

/// <summary>Per-call options for <see cref="IVectorIndex.Search"/> and <see cref="IVectorIndex.SearchBatch"/>.</summary>
/// <remarks>Instances are immutable once built and may be shared between threads and calls.</remarks>
public sealed class SearchOptions
{
    private readonly int _maxDegreeOfParallelism = -1;
    private readonly int? _searchWidth;
    private readonly int? _rescoreDepth;

    /// <summary>Options with no filter, all cores for batches, and each index's default search width.</summary>
    public static SearchOptions Default { get; } = new();

    /// <summary>
    /// Restricts results to ids for which the predicate returns <see langword="true"/>. Default
    /// <see langword="null"/>: no filter. The filter is evaluated <em>during</em> the search, so a search for k results
    /// returns k passing items whenever that many exist (an approximate index may reach fewer). A selective filter
    /// makes an approximate search walk or probe further before it finds k passing items.
    /// </summary>
    /// <remarks>
    /// The predicate may be called concurrently from several threads during a batch search and must be thread-safe.
    /// It must not call back into the index. Exceptions it throws propagate to the caller of the search.
    /// </remarks>
    public Func<long, bool>? Filter { get; init; }

    /// <summary>
    /// The most threads a batch search uses. Default -1, meaning one per core; otherwise 1 or more. Fewer threads
    /// leave cores to concurrent work and make a batch take longer. Single-query searches always run on the calling
    /// thread.
    /// </summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is 0 or less than -1.</exception>
    public int MaxDegreeOfParallelism
    {
        get => _maxDegreeOfParallelism;
        init => _maxDegreeOfParallelism = OptionChecks.Parallelism(value, nameof(MaxDegreeOfParallelism));
    }

    /// <summary>
    /// How widely an approximate index searches; larger is slower and finds more of the true nearest items.
    /// <see langword="null"/> (the default) uses the index's own default (its <see cref="VectorIndex.TunedDefaults"/> when
    /// set, else its options'); otherwise 1 or more. For the graph index it is the number of candidates kept
    /// during the walk (the beam width); for the inverted-file index it is the number of lists probed per query. The
    /// exact index ignores it.
    /// </summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is not positive.</exception>
    public int? SearchWidth
    {
        get => _searchWidth;
        init
        {
            if (value is <= 0)
            {
                ThrowHelper.ThrowArgumentOutOfRange(nameof(SearchWidth), value.Value, "must be positive");
            }

            _searchWidth = value;
        }
    }

    /// <summary>
    /// For an index that searches compressed codes and keeps the full vectors: how many of the best candidates by
    /// code distance are re-scored exactly on the full vectors before the best k are returned. 0 turns re-scoring off
    /// for this call; <see langword="null"/> (the default) uses the index's own default (its
    /// <see cref="VectorIndex.TunedDefaults"/> when set, else its options'); otherwise 1 or more. Deeper
    /// recovers more misranked neighbours at one full-vector distance per candidate. Indexes without full vectors
    /// ignore it.
    /// </summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is negative.</exception>
    public int? RescoreDepth
    {
        get => _rescoreDepth;
        init
        {
            if (value is < 0)
            {
                ThrowHelper.ThrowArgumentOutOfRange(nameof(RescoreDepth), value.Value, "must be 0 (off) or positive");
            }

            _rescoreDepth = value;
        }
    }

    internal int EffectiveParallelism => _maxDegreeOfParallelism == -1 ? Environment.ProcessorCount : _maxDegreeOfParallelism;
}
