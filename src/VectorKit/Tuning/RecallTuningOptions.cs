using VectorKit.Internal;

namespace VectorKit.Tuning;

/// <summary>What <see cref="RecallTuning"/> aims for, how it samples queries and how long it may take.</summary>
/// <remarks>Each property is checked when it is set. Instances are immutable and may be shared between threads.</remarks>
public sealed class RecallTuningOptions
{
    private readonly double _targetRecall = 0.95;
    private readonly int _k = 10;
    private readonly double _confidence = 0.95;
    private readonly double _heldOutFraction = 0.25;
    private readonly int _drawnQueries = 1000;
    private readonly double _noiseScale = 0.5;
    private readonly TimeSpan? _timeBudget;
    private readonly int _maxDegreeOfParallelism = 1;

    /// <summary>Recall@10 of 0.95 at 95 % confidence, a quarter of the queries held out, 1,000 drawn queries, no time limit.</summary>
    public static RecallTuningOptions Default { get; } = new();

    /// <summary>The recall@<see cref="K"/> the defaults must reach, in (0, 1]. Default 0.95.</summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is not in (0, 1].</exception>
    public double TargetRecall
    {
        get => _targetRecall;
        init => _targetRecall = OptionChecks.Recall(value, nameof(TargetRecall));
    }

    /// <summary>The number of neighbours the recall counts, 1 to <see cref="Indexes.TunedSearchDefaults.MaxK"/>. Default 10.</summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is outside that range.</exception>
    public int K
    {
        get => _k;
        init => _k = OptionChecks.InRange(value, 1, Indexes.TunedSearchDefaults.MaxK, nameof(K));
    }

    /// <summary>
    /// The confidence level of the recall intervals, in (0, 1). Default 0.95. A setting counts as meeting the target
    /// only when the lower end of its interval on the tuning queries does, so the held-out recall falls short of the
    /// target only by chance at about half of one minus this level.
    /// </summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is not in (0, 1).</exception>
    public double Confidence
    {
        get => _confidence;
        init => _confidence = OptionChecks.OpenUnitInterval(value, nameof(Confidence));
    }

    /// <summary>
    /// The fraction of the queries kept out of tuning to report the chosen setting's recall on, in (0, 1). Default 0.25:
    /// the choice needs the tighter interval more than the report does, since a wider interval on the tuning queries makes
    /// the chosen setting costlier, while the held-out figure only confirms it.
    /// </summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is not in (0, 1).</exception>
    public double HeldOutFraction
    {
        get => _heldOutFraction;
        init => _heldOutFraction = OptionChecks.OpenUnitInterval(value, nameof(HeldOutFraction));
    }

    /// <summary>Queries drawn from the index's own vectors when the caller gives none, 2 to 1,000,000. Default 1,000.</summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is outside that range.</exception>
    public int DrawnQueries
    {
        get => _drawnQueries;
        init => _drawnQueries = OptionChecks.InRange(value, 2, 1_000_000, nameof(DrawnQueries));
    }

    /// <summary>
    /// The size of the perturbation added to a drawn query, as a multiple of the median distance from a stored vector
    /// to its nearest other vector; in [0, 10]. Default 0.5. 0 draws the stored vectors themselves (which then find
    /// themselves first and overstate recall).
    /// </summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is outside [0, 10].</exception>
    public double NoiseScale
    {
        get => _noiseScale;
        init
        {
            if (!(value >= 0 && value <= 10))
            {
                ThrowHelper.ThrowArgumentOutOfRange(nameof(NoiseScale), value, "must be in [0, 10]");
            }

            _noiseScale = value;
        }
    }

    /// <summary>
    /// How long the search over settings may run, or <see langword="null"/> (the default) for no limit. Once spent, the
    /// tuning chooses among the settings measured so far and reports itself incomplete; the ground truth and the
    /// held-out measurement come on top.
    /// </summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is not positive.</exception>
    public TimeSpan? TimeBudget
    {
        get => _timeBudget;
        init
        {
            if (value is { } budget && budget <= TimeSpan.Zero)
            {
                ThrowHelper.ThrowArgumentOutOfRange(nameof(TimeBudget), budget, "must be positive");
            }

            _timeBudget = value;
        }
    }

    /// <summary>
    /// Threads the measured searches use: 1 (the default) times each setting on one thread, which ranks costs most
    /// steadily; -1 means one per core. The exact ground truth always uses every core.
    /// </summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is 0 or less than -1.</exception>
    public int MaxDegreeOfParallelism
    {
        get => _maxDegreeOfParallelism;
        init => _maxDegreeOfParallelism = OptionChecks.Parallelism(value, nameof(MaxDegreeOfParallelism));
    }

    /// <summary>The seed of the query split and of drawn queries. Default 1.</summary>
    public int Seed { get; init; } = 1;

    /// <summary>
    /// Whether the chosen setting becomes the index's default (<see cref="Indexes.VectorIndex.ApplyTunedDefaults"/>).
    /// Default <see langword="true"/>. When no setting measured meets the target, the one with the highest recall is
    /// applied; <see cref="TuningReport.TargetMet"/> says which happened.
    /// </summary>
    public bool ApplyDefaults { get; init; } = true;
}
