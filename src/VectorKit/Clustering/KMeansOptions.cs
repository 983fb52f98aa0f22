using VectorKit.Internal;

namespace VectorKit.Clustering;

/// <summary>Options for <see cref="KMeans"/>.Train.</summary>
/// <remarks>
/// Each property is checked when it is set; an out-of-range value throws an <see cref="ArgumentOutOfRangeException"/>
/// naming the option and its allowed range. Instances are immutable once built and may be shared.
/// </remarks>
public sealed class KMeansOptions
{
    private readonly int _clusterCount = 256;
    private readonly int _maxIterations = 20;
    private readonly int? _sampleSize;
    private readonly double _tolerance = 1e-4;
    private readonly int _maxDegreeOfParallelism = -1;

    /// <summary>The defaults: 256 clusters, at most 20 iterations, a sample of 256 rows per cluster, seed 42.</summary>
    public static KMeansOptions Default { get; } = new();

    /// <summary>The number of clusters (centroids) k. Default 256.</summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is outside [1, 1048576].</exception>
    public int ClusterCount
    {
        get => _clusterCount;
        init
        {
            if (value < 1 || value > 1 << 20)
            {
                ThrowHelper.ThrowArgumentOutOfRange(nameof(ClusterCount), value, "must be in [1, 1048576]");
            }

            _clusterCount = value;
        }
    }

    /// <summary>The most Lloyd iterations (assign, then move each centroid to its cluster's mean). Default 20.</summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is outside [0, 10000].</exception>
    public int MaxIterations
    {
        get => _maxIterations;
        init => _maxIterations = OptionChecks.InRange(value, 0, 10_000, nameof(MaxIterations));
    }

    /// <summary>
    /// The most rows training uses: larger inputs are sampled uniformly without replacement (seeded).
    /// <see langword="null"/> (the default) means 256 rows per cluster, a common-practice size at which more rows
    /// barely move the centroids.
    /// </summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is not positive.</exception>
    public int? SampleSize
    {
        get => _sampleSize;
        init
        {
            if (value is <= 0)
            {
                ThrowHelper.ThrowArgumentOutOfRange(nameof(SampleSize), value.Value, "must be positive");
            }

            _sampleSize = value;
        }
    }

    /// <summary>
    /// Training stops (converged) when an iteration lowers the objective by less than this fraction of it, or when
    /// no row changes cluster. Default 1e-4; 0 runs until no row moves or <see cref="MaxIterations"/>.
    /// </summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is negative or not finite.</exception>
    public double Tolerance
    {
        get => _tolerance;
        init
        {
            if (!(value >= 0) || double.IsInfinity(value))
            {
                ThrowHelper.ThrowArgumentOutOfRange(nameof(Tolerance), value, "must be a finite number ≥ 0");
            }

            _tolerance = value;
        }
    }

    /// <summary>The seed of every random choice (sampling, k-means++ seeding): the same input and seed give the same centroids. Default 42.</summary>
    public int Seed { get; init; } = 42;

    /// <summary>The most threads training uses; -1 (the default) means one per core.</summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is 0 or less than -1.</exception>
    public int MaxDegreeOfParallelism
    {
        get => _maxDegreeOfParallelism;
        init => _maxDegreeOfParallelism = OptionChecks.Parallelism(value, nameof(MaxDegreeOfParallelism));
    }

    internal int EffectiveSampleSize => _sampleSize ?? (int)Math.Min(int.MaxValue, 256L * _clusterCount);

    internal int EffectiveParallelism => _maxDegreeOfParallelism == -1 ? Environment.ProcessorCount : _maxDegreeOfParallelism;
}
