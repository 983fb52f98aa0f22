using System.Text.Json.Serialization;

namespace VectorKit.Reranking;

/// <summary>
/// The JSON shape of <see cref="RerankingOptions"/>: plain nullable properties, so that a missing property means
/// "the default" and the options' own setters check every value that is present.
/// </summary>
[JsonUnmappedMemberHandling(JsonUnmappedMemberHandling.Disallow)]
internal sealed class RerankingOptionsDocument
{
    public int? FinalCount { get; set; }

    public int? RetrievalDepth { get; set; }

    public int? ExactRescoringDepth { get; set; }

    public int? SearchWidth { get; set; }

    public int? ScoringBatchSize { get; set; }

    public int? MaxDegreeOfParallelism { get; set; }

    public static RerankingOptionsDocument From(RerankingOptions options) => new()
    {
        FinalCount = options.FinalCount,
        RetrievalDepth = options.RetrievalDepth,
        ExactRescoringDepth = options.ExactRescoringDepth,
        SearchWidth = options.SearchWidth,
        ScoringBatchSize = options.ScoringBatchSize,
        MaxDegreeOfParallelism = options.MaxDegreeOfParallelism,
    };

    public RerankingOptions ToOptions()
    {
        RerankingOptions defaults = RerankingOptions.Default;
        return new RerankingOptions
        {
            FinalCount = FinalCount ?? defaults.FinalCount,
            RetrievalDepth = RetrievalDepth ?? defaults.RetrievalDepth,
            ExactRescoringDepth = ExactRescoringDepth,
            SearchWidth = SearchWidth,
            ScoringBatchSize = ScoringBatchSize ?? defaults.ScoringBatchSize,
            MaxDegreeOfParallelism = MaxDegreeOfParallelism ?? defaults.MaxDegreeOfParallelism,
        };
    }
}
