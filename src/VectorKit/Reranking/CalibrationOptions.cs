using VectorKit.Internal;
using VectorKit.Indexes;
namespace VectorKit.Reranking;

/// <summary>What <see cref="RerankingCalibration.Calibrate"/> aims for and how it samples.</summary>
/// <remarks>Each property is checked when it is set. Instances are immutable and may be shared between threads.</remarks>
public sealed class CalibrationOptions
{
    private readonly double _targetRecall = 0.95;
    private readonly int _finalCount = 10;
    private readonly double _confidence = 0.95;
    private readonly double _maxUncertainty = 0.05;
    private readonly double _heldOutFraction = 0.5;
    private readonly int _maxRetrievalDepth = 4096;
    private readonly int[]? _searchWidths;
    private readonly int? _exactRescoringOverfetch;
    private readonly int _scoringBatchSize = 1024;
    private readonly int _maxDegreeOfParallelism = -1;
    private readonly CalibrationSelection _selection;

    /// <summary>Recall 0.95 of the top 10 at 95 % confidence within ± 0.05, half the sample held out, seed 1.</summary>
    public static CalibrationOptions Default { get; } = new();

    /// <summary>The fraction of the scorer's true top <see cref="FinalCount"/> the pipeline must return, in (0, 1]. Default 0.95.</summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is not in (0, 1].</exception>
    public double TargetRecall
    {
        get => _targetRecall;
        init => _targetRecall = OptionChecks.Recall(value, nameof(TargetRecall));
    }

    /// <summary>Results per query (k) the recall is measured on. Default 10.</summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is not positive.</exception>
    public int FinalCount
    {
        get => _finalCount;
        init => _finalCount = Positive(value, nameof(FinalCount));
    }

    /// <summary>The confidence level of the reported recall intervals, in (0, 1). Default 0.95.</summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is not in (0, 1).</exception>
    public double Confidence
    {
        get => _confidence;
        init => _confidence = OptionChecks.OpenUnitInterval(value, nameof(Confidence));
    }

    /// <summary>
    /// The widest acceptable half-width of the held-out recall interval at the target recall, in (0, 0.5]. Default
    /// 0.05. Sets the sample size needed: a sample too small for it is rejected with the number of queries needed.
    /// </summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is not in (0, 0.5].</exception>
    public double MaxUncertainty
    {
        get => _maxUncertainty;
        init
        {
            if (!(value > 0 && value <= 0.5))
            {
                ThrowHelper.ThrowArgumentOutOfRange(nameof(MaxUncertainty), value, "must be in (0, 0.5]");
            }

            _maxUncertainty = value;
        }
    }

    /// <summary>The fraction of the sample held out to check the chosen depths, in (0, 1). Default 0.5.</summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is not in (0, 1).</exception>
    public double HeldOutFraction
    {
        get => _heldOutFraction;
        init => _heldOutFraction = OptionChecks.OpenUnitInterval(value, nameof(HeldOutFraction));
    }

    /// <summary>How a depth is judged to meet the target on the tuning queries. Default <see cref="CalibrationSelection.LowerConfidenceBound"/>.</summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is not a defined member.</exception>
    public CalibrationSelection Selection
    {
        get => _selection;
        init
        {
            if (!Enum.IsDefined(value))
            {
                ThrowHelper.ThrowArgumentOutOfRange(nameof(Selection), value, "must be a defined CalibrationSelection");
            }

            _selection = value;
        }
    }

    /// <summary>Seeds the split into tuning and held-out queries. Default 1.</summary>
    public int Seed { get; init; } = 1;

    /// <summary>
    /// The ids of the whole collection the scorer could rank; <see langword="null"/> (the default) takes them from
    /// the index with <see cref="Indexes.IVectorIndex.GetIds"/>.
    /// </summary>
    public IReadOnlyList<long>? CollectionIds { get; init; }

    /// <summary>The deepest retrieval tried (capped at the collection size). Default 4096.</summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is not positive.</exception>
    public int MaxRetrievalDepth
    {
        get => _maxRetrievalDepth;
        init => _maxRetrievalDepth = Positive(value, nameof(MaxRetrievalDepth));
    }

    /// <summary>
    /// Search widths to try (see <see cref="Indexes.SearchOptions.SearchWidth"/>); <see langword="null"/> (the
    /// default) uses the index's own width only. With several, the one with the least estimated time per query wins.
    /// </summary>
    /// <exception cref="ArgumentException">The list is empty or holds a value that is not positive.</exception>
    public IReadOnlyList<int>? SearchWidths
    {
        get => _searchWidths;
        init
        {
            if (value is not null)
            {
                if (value.Count == 0)
                {
                    ThrowHelper.ThrowArgument(nameof(SearchWidths), "SearchWidths is empty; give at least one width, or null for the index's default.");
                }

                foreach (int width in value)
                {
                    Positive(width, nameof(SearchWidths));
                }
            }

            _searchWidths = value?.ToArray();
        }
    }

    /// <summary>
    /// When set, calibrates an exact re-scoring stage too, choosing the retrieval and exact depths jointly: retrieval
    /// depths from the one that retrieval alone would need up to this many times it are tried, and the cheapest pair
    /// meeting the target wins. <see langword="null"/> (the default): no exact stage.
    /// </summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is less than 1.</exception>
    public int? ExactRescoringOverfetch
    {
        get => _exactRescoringOverfetch;
        init => _exactRescoringOverfetch = value is null ? null : Positive(value.Value, nameof(ExactRescoringOverfetch));
    }

    /// <summary>Full vectors for the exact stage; <see langword="null"/> reads them from the index.</summary>
    public IFullVectorSource? FullVectors { get; init; }

    /// <summary>The most candidates per scorer call, also in the exhaustive pass. Default 1024.</summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is not positive.</exception>
    public int ScoringBatchSize
    {
        get => _scoringBatchSize;
        init => _scoringBatchSize = Positive(value, nameof(ScoringBatchSize));
    }

    /// <summary>The most threads used; -1 (the default) means one per core.</summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is 0 or less than -1.</exception>
    public int MaxDegreeOfParallelism
    {
        get => _maxDegreeOfParallelism;
        init => _maxDegreeOfParallelism = OptionChecks.Parallelism(value, nameof(MaxDegreeOfParallelism));
    }

    private static int Positive(int value, string name)
    {
        if (value <= 0)
        {
            ThrowHelper.ThrowArgumentOutOfRange(name, value, "must be positive");
        }

        return value;
    }
}
