using VectorKit.Internal;
using System.Text.Json;
using System.Text.Json.Serialization;

namespace VectorKit.Reranking;

/// <summary>
/// How many candidates each stage of a <see cref="RerankingPipeline{TQuery}"/> keeps, and how it searches.
/// <see cref="RerankingCalibration.Calibrate"/> chooses these for a target recall; <see cref="ToJson"/> and
/// <see cref="FromJson"/> carry the chosen settings to a service.
/// </summary>
/// <remarks>
/// Each property is checked when it is set. The relations between them (<see cref="FinalCount"/> ≤
/// <see cref="ExactRescoringDepth"/> ≤ <see cref="RetrievalDepth"/>) are checked when a pipeline is built and by
/// <see cref="FromJson"/>. Instances are immutable and may be shared between threads.
/// </remarks>
public sealed class RerankingOptions
{
    private readonly int _finalCount = 10;
    private readonly int _retrievalDepth = 100;
    private readonly int? _exactRescoringDepth;
    private readonly int? _searchWidth;
    private readonly int _scoringBatchSize = 1024;
    private readonly int _maxDegreeOfParallelism = -1;

    /// <summary>Ten results from 100 retrieved candidates, no exact stage, the index's default width, all cores.</summary>
    public static RerankingOptions Default { get; } = new();

    /// <summary>Results returned per query (k): the scorer's best among the candidates. Default 10.</summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is not positive.</exception>
    public int FinalCount
    {
        get => _finalCount;
        init => _finalCount = Positive(value, nameof(FinalCount));
    }

    /// <summary>Candidates retrieved from the index per query. Default 100; at least <see cref="FinalCount"/>.</summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is not positive.</exception>
    public int RetrievalDepth
    {
        get => _retrievalDepth;
        init => _retrievalDepth = Positive(value, nameof(RetrievalDepth));
    }

    /// <summary>
    /// When set, the retrieved candidates are re-scored on their full vectors and only this many of the nearest go on
    /// to the scorer; <see langword="null"/> (the default) skips the stage. Worth it over a compressed index, whose
    /// own distances are approximate. Between <see cref="FinalCount"/> and <see cref="RetrievalDepth"/>.
    /// </summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is not positive.</exception>
    public int? ExactRescoringDepth
    {
        get => _exactRescoringDepth;
        init => _exactRescoringDepth = value is null ? null : Positive(value.Value, nameof(ExactRescoringDepth));
    }

    /// <summary>The search width passed to the index (see <see cref="Indexes.SearchOptions.SearchWidth"/>); <see langword="null"/> for its default.</summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is not positive.</exception>
    public int? SearchWidth
    {
        get => _searchWidth;
        init => _searchWidth = value is null ? null : Positive(value.Value, nameof(SearchWidth));
    }

    /// <summary>The most candidates handed to the scorer in one call. Default 1024.</summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is not positive.</exception>
    public int ScoringBatchSize
    {
        get => _scoringBatchSize;
        init => _scoringBatchSize = Positive(value, nameof(ScoringBatchSize));
    }

    /// <summary>The most queries a batch runs at once; -1 (the default) means one per core.</summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is 0 or less than -1.</exception>
    public int MaxDegreeOfParallelism
    {
        get => _maxDegreeOfParallelism;
        init => _maxDegreeOfParallelism = OptionChecks.Parallelism(value, nameof(MaxDegreeOfParallelism));
    }

    /// <summary>
    /// Restricts candidates to ids for which the predicate returns <see langword="true"/> (see
    /// <see cref="Indexes.SearchOptions.Filter"/>). Not serialised.
    /// </summary>
    [JsonIgnore]
    public Func<long, bool>? Filter { get; init; }

    /// <summary>The number of candidates the pairwise scorer sees per query: the exact stage's depth when set, else the retrieval depth.</summary>
    [JsonIgnore]
    public int ScoredDepth => _exactRescoringDepth ?? _retrievalDepth;

    /// <summary>Serialises the settings (all but <see cref="Filter"/>) as JSON.</summary>
    /// <returns>An indented JSON object.</returns>
    public string ToJson() => JsonSerializer.Serialize(RerankingOptionsDocument.From(this), RerankingJsonContext.Default.RerankingOptionsDocument);

    /// <summary>Reads settings written by <see cref="ToJson"/>; missing properties take their defaults, unknown ones are rejected.</summary>
    /// <param name="json">A JSON object.</param>
    /// <returns>The settings, checked as a pipeline would check them.</returns>
    /// <exception cref="ArgumentNullException"><paramref name="json"/> is null.</exception>
    /// <exception cref="ArgumentException">The JSON is malformed, or a value is out of range or inconsistent with another.</exception>
    public static RerankingOptions FromJson(string json)
    {
        ArgumentNullException.ThrowIfNull(json);
        RerankingOptions? options;
        try
        {
            options = JsonSerializer.Deserialize(json, RerankingJsonContext.Default.RerankingOptionsDocument)?.ToOptions();
        }
        catch (JsonException e)
        {
            throw new ArgumentException($"The re-ranking settings are not valid JSON: {e.Message}", nameof(json), e);
        }
        catch (ArgumentOutOfRangeException e)
        {
            throw new ArgumentException($"A re-ranking setting is out of range: {e.Message}", nameof(json), e);
        }

        if (options is null)
        {
            ThrowHelper.ThrowArgument(nameof(json), "The re-ranking settings are JSON null; expected an object.");
        }

        options.CheckConsistent(nameof(json));
        return options;
    }

    /// <summary>Checks the relations between the depths.</summary>
    /// <param name="paramName">The parameter to name in the exception.</param>
    internal void CheckConsistent(string paramName)
    {
        if (_retrievalDepth < _finalCount)
        {
            ThrowHelper.ThrowArgument(paramName, $"RetrievalDepth ({_retrievalDepth}) is less than FinalCount ({_finalCount}); a stage cannot return more results than it receives candidates.");
        }

        if (_exactRescoringDepth is int exact)
        {
            if (exact < _finalCount)
            {
                ThrowHelper.ThrowArgument(paramName, $"ExactRescoringDepth ({exact}) is less than FinalCount ({_finalCount}); a stage cannot return more results than it receives candidates.");
            }

            if (exact > _retrievalDepth)
            {
                ThrowHelper.ThrowArgument(paramName, $"ExactRescoringDepth ({exact}) is more than RetrievalDepth ({_retrievalDepth}); the exact stage can only keep candidates that were retrieved.");
            }
        }
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
