using VectorKit.Indexes;

namespace VectorKit.Evaluation;

/// <summary>Options for <see cref="SearchQuality.Measure"/>.</summary>
/// <remarks>Instances are immutable once built and may be shared.</remarks>
public sealed class QualityMeasurementOptions
{
    private readonly int _k = 10;
    private readonly int _buildBatchSize = 16_384;

    /// <summary>k = 10, default search options, 16,384 vectors per add call.</summary>
    public static QualityMeasurementOptions Default { get; } = new();

    /// <summary>Results asked for per query, and the recall cut-off. Default 10.</summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is not positive.</exception>
    public int K
    {
        get => _k;
        init
        {
            if (value <= 0)
            {
                ThrowHelper.ThrowArgumentOutOfRange(nameof(K), value, "must be positive");
            }

            _k = value;
        }
    }

    /// <summary>Filter, search width and parallelism of the timed batch search; <see langword="null"/> for <see cref="SearchOptions.Default"/>.</summary>
    public SearchOptions? Search { get; init; }

    /// <summary>
    /// Vectors per <see cref="IVectorIndex.AddRange"/> call during the build. Cancellation is checked and progress
    /// reported between calls, so smaller batches respond sooner; larger ones let an index build in bigger steps.
    /// Default 16,384.
    /// </summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is not positive.</exception>
    public int BuildBatchSize
    {
        get => _buildBatchSize;
        init
        {
            if (value <= 0)
            {
                ThrowHelper.ThrowArgumentOutOfRange(nameof(BuildBatchSize), value, "must be positive");
            }

            _buildBatchSize = value;
        }
    }
}
