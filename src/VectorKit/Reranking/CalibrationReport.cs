using System.Globalization;
using System.Text;
using System.Text.Json;

namespace VectorKit.Reranking;

/// <summary>
/// The outcome of <see cref="RerankingCalibration.Calibrate"/>: the chosen settings, and per stage the depth, the
/// recall kept with its confidence interval, scorer calls and time per query, all measured on held-out queries.
/// </summary>
public sealed class CalibrationReport
{
    internal CalibrationReport()
    {
    }

    /// <summary>The chosen settings: pass them to a <see cref="RerankingPipeline{TQuery}"/>, or save them with <see cref="RerankingOptions.ToJson"/>.</summary>
    public required RerankingOptions Settings { get; init; }

    /// <summary>The stages of the chosen pipeline, in order, measured on the held-out queries.</summary>
    public required IReadOnlyList<StageReport> Stages { get; init; }

    /// <summary>The recall asked for.</summary>
    public double TargetRecall { get; init; }

    /// <summary>The confidence level of the intervals.</summary>
    public double Confidence { get; init; }

    /// <summary>The seed of the split into tuning and held-out queries.</summary>
    public int Seed { get; init; }

    /// <summary>Items in the collection the scorer ranked exhaustively.</summary>
    public int CollectionSize { get; init; }

    /// <summary>Queries the depths were chosen on.</summary>
    public int TuningQueryCount { get; init; }

    /// <summary>Queries the choice was checked on.</summary>
    public int HeldOutQueryCount { get; init; }

    /// <summary>The chosen pipeline's recall on the tuning queries.</summary>
    public double TuningRecall { get; init; }

    /// <summary>Whether some setting within the allowed depths and widths met the target on the tuning queries; when not, the settings are the best found.</summary>
    public bool TargetReachedOnTuning { get; init; }

    /// <summary>The chosen pipeline's recall on the held-out queries: its final result against the scorer's true top k.</summary>
    public double HeldOutRecall { get; init; }

    /// <summary>The lower end of the held-out recall's confidence interval.</summary>
    public double HeldOutRecallLow { get; init; }

    /// <summary>The upper end of the held-out recall's confidence interval.</summary>
    public double HeldOutRecallHigh { get; init; }

    /// <summary>Whether the held-out recall is at least the target.</summary>
    public bool MeetsTarget => HeldOutRecall >= TargetRecall;

    /// <summary>Whether the target lies at or below the held-out interval's upper end: a shortfall, if any, is within sampling error.</summary>
    public bool WithinSamplingError => HeldOutRecallHigh >= TargetRecall;

    /// <summary>
    /// Where the recall that the pipeline does not return was lost, measured on the held-out queries: at the index's
    /// search, at the retrieval depth, at exact re-scoring and at the pairwise stage, each with its interval. The
    /// losses add up to one minus <see cref="HeldOutRecall"/>.
    /// </summary>
    public IReadOnlyList<RecallLoss> RecallLosses { get; init; } = [];

    /// <summary>The index's tuned search defaults (from recall-targeted tuning) that retrieval ran with, or <see langword="null"/> when it has none.</summary>
    public VectorKit.Indexes.TunedSearchDefaults? IndexDefaults { get; init; }

    /// <summary>Scorer calls per query when scoring everything: the collection size.</summary>
    public double ExhaustiveScorerCallsPerQuery { get; init; }

    /// <summary>Measured time per query when scoring everything, summed over threads.</summary>
    public double ExhaustiveMillisecondsPerQuery { get; init; }

    /// <summary>How many times fewer scorer calls the chosen pipeline makes than scoring everything.</summary>
    public double ScorerCallReduction { get; init; }

    /// <summary>A fixed-width text table of the stages, with the exhaustive baseline as its first row.</summary>
    /// <returns>Several lines of text.</returns>
    public string ToTable()
    {
        CultureInfo c = CultureInfo.InvariantCulture;
        var text = new StringBuilder();
        text.AppendLine(c, $"Target recall {TargetRecall:0.###} of the scorer's top {Settings.FinalCount}; {Confidence * 100:0.#} % intervals; {TuningQueryCount} tuning + {HeldOutQueryCount} held-out queries (seed {Seed}); {CollectionSize:N0} items.");
        text.AppendLine(c, $"{"stage",-18} {"depth",7} {"width",7} {"recall kept",12} {"interval",17} {"scorer calls/query",19} {"ms/query",10}");
        text.AppendLine(c, $"{"score everything",-18} {CollectionSize,7} {"-",7} {1.0,12:0.000} {"exact",17} {ExhaustiveScorerCallsPerQuery,19:0.#} {ExhaustiveMillisecondsPerQuery,10:0.###}");
        foreach (StageReport s in Stages)
        {
            string name = s.Stage switch
            {
                RerankingStage.Retrieval => "retrieval",
                RerankingStage.ExactRescoring => "exact re-scoring",
                RerankingStage.PairwiseScoring => "pairwise scoring",
                _ => s.Stage.ToString(),
            };
            string width = s.Stage == RerankingStage.Retrieval ? (s.SearchWidth?.ToString(c) ?? "default") : "-";
            string interval = string.Create(c, $"[{s.RecallLow:0.000}, {s.RecallHigh:0.000}]");
            text.AppendLine(c, $"{name,-18} {s.Depth,7} {width,7} {s.Recall,12:0.000} {interval,17} {s.ScorerCallsPerQuery,19:0.#} {s.MillisecondsPerQuery,10:0.###}");
        }

        text.AppendLine("(ms/query: time per query summed over threads, so one thread's cost; recall and intervals on the held-out queries.)");
        if (IndexDefaults is { } tuned)
        {
            text.AppendLine(c, $"The index searched with its tuned defaults: {tuned}.");
        }

        if (RecallLosses.Count > 0)
        {
            text.AppendLine(c, $"{"recall lost at",-18} {"lost",7} {"interval",17}");
            foreach (RecallLoss loss in RecallLosses)
            {
                string cause = loss.Cause switch
                {
                    RecallLossCause.IndexSearch => "index search",
                    RecallLossCause.RetrievalDepth => "retrieval depth",
                    RecallLossCause.Retrieval => "retrieval",
                    RecallLossCause.ExactRescoring => "exact re-scoring",
                    RecallLossCause.PairwiseScoring => "pairwise scoring",
                    _ => loss.Cause.ToString(),
                };
                string interval = string.Create(c, $"[{loss.LostLow:0.000}, {loss.LostHigh:0.000}]");
                text.AppendLine(c, $"{cause,-18} {loss.Lost,7:0.000} {interval,17}");
            }
        }

        text.Append(c, $"Scorer calls {ScorerCallReduction:0.#}x fewer than scoring everything; held-out recall {HeldOutRecall:0.000} ");
        text.Append(MeetsTarget ? "meets the target." : WithinSamplingError ? "is below the target, within sampling error." : "is below the target beyond sampling error.");
        if (!TargetReachedOnTuning)
        {
            text.Append(" No setting reached the target on the tuning queries: raise MaxRetrievalDepth or try wider searches.");
        }

        return text.ToString();
    }

    /// <summary>The whole report as JSON (the settings, every stage, the sample sizes).</summary>
    /// <returns>An indented JSON object.</returns>
    public string ToJson() => JsonSerializer.Serialize(this, RerankingJsonContext.Default.CalibrationReport);
}
