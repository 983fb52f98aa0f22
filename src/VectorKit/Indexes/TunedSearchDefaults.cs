namespace VectorKit.Indexes;

/// <summary>
/// Search settings an index uses when a call's <see cref="SearchOptions"/> leaves them unset, chosen by measuring the
/// index against a recall target (<c>VectorKit.Tuning.RecallTuning</c>) or set directly with
/// <see cref="VectorIndex.ApplyTunedDefaults"/>. They are saved with the index.
/// </summary>
/// <remarks>Instances are immutable and may be shared between indexes and threads.</remarks>
public sealed class TunedSearchDefaults
{
    /// <summary>Creates the settings.</summary>
    /// <param name="searchWidth">The default <see cref="SearchOptions.SearchWidth"/>, or <see langword="null"/> to keep the index options' own; 1 to 100,000.</param>
    /// <param name="rescoreDepth">The default <see cref="SearchOptions.RescoreDepth"/>, or <see langword="null"/> to keep the index options' own; 0 to <see cref="VectorIndexOptions.MaxRescoreDepth"/>.</param>
    /// <param name="targetRecall">The recall@<paramref name="k"/> the settings were chosen to meet, in (0, 1].</param>
    /// <param name="k">The number of neighbours the recall counts, 1 to 100,000.</param>
    /// <exception cref="ArgumentOutOfRangeException">A value is outside its range.</exception>
    public TunedSearchDefaults(int? searchWidth, int? rescoreDepth, double targetRecall, int k)
    {
        if (searchWidth is < 1 or > MaxSearchWidth)
        {
            ThrowHelper.ThrowArgumentOutOfRange(nameof(searchWidth), searchWidth.Value, $"must be null or in [1, {MaxSearchWidth}]");
        }

        if (rescoreDepth is < 0 or > VectorIndexOptions.MaxRescoreDepth)
        {
            ThrowHelper.ThrowArgumentOutOfRange(nameof(rescoreDepth), rescoreDepth.Value, $"must be null or in [0, {VectorIndexOptions.MaxRescoreDepth}]");
        }

        if (!(targetRecall > 0 && targetRecall <= 1))
        {
            ThrowHelper.ThrowArgumentOutOfRange(nameof(targetRecall), targetRecall, "must be in (0, 1]");
        }

        if (k is < 1 or > MaxK)
        {
            ThrowHelper.ThrowArgumentOutOfRange(nameof(k), k, $"must be in [1, {MaxK}]");
        }

        SearchWidth = searchWidth;
        RescoreDepth = rescoreDepth;
        TargetRecall = targetRecall;
        K = k;
    }

    /// <summary>The largest search width the settings accept (the graph index's own cap).</summary>
    public const int MaxSearchWidth = 100_000;

    /// <summary>The largest k the settings accept.</summary>
    public const int MaxK = 100_000;

    /// <summary>The default search width (graph: candidates kept during the walk; inverted file: lists probed), or <see langword="null"/> for the index options' own.</summary>
    public int? SearchWidth { get; }

    /// <summary>The default re-scoring depth, or <see langword="null"/> for the index options' own.</summary>
    public int? RescoreDepth { get; }

    /// <summary>The recall@<see cref="K"/> the settings were chosen to meet.</summary>
    public double TargetRecall { get; }

    /// <summary>The number of neighbours the recall counts.</summary>
    public int K { get; }

    /// <inheritdoc/>
    public override string ToString()
        => string.Create(System.Globalization.CultureInfo.InvariantCulture, $"search width {SearchWidth?.ToString(System.Globalization.CultureInfo.InvariantCulture) ?? "(options)"}, re-score depth {RescoreDepth?.ToString(System.Globalization.CultureInfo.InvariantCulture) ?? "(options)"}, for recall@{K} {TargetRecall:0.###}");
}
