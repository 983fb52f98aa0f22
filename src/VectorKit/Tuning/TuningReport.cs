using System.Globalization;
using System.Text;

namespace VectorKit.Tuning;

/// <summary>What <see cref="RecallTuning"/> measured and chose.</summary>
public sealed class TuningReport
{
    internal TuningReport(
        double targetRecall,
        int k,
        double confidence,
        IReadOnlyList<TuningPoint> curve,
        TuningPoint chosen,
        TuningPoint heldOut,
        TuningPoint untunedHeldOut,
        bool targetMet,
        bool completed,
        bool applied,
        int tuningQueries,
        int heldOutQueries,
        bool queriesDrawn)
    {
        TargetRecall = targetRecall;
        K = k;
        Confidence = confidence;
        Curve = curve;
        Chosen = chosen;
        HeldOut = heldOut;
        UntunedHeldOut = untunedHeldOut;
        TargetMet = targetMet;
        Completed = completed;
        Applied = applied;
        TuningQueries = tuningQueries;
        HeldOutQueries = heldOutQueries;
        QueriesDrawn = queriesDrawn;
    }

    /// <summary>The recall@<see cref="K"/> aimed for.</summary>
    public double TargetRecall { get; }

    /// <summary>The number of neighbours the recall counts.</summary>
    public int K { get; }

    /// <summary>The confidence level of every interval in the report.</summary>
    public double Confidence { get; }

    /// <summary>Every setting measured on the tuning queries, in the order measured: the recall–cost curve.</summary>
    public IReadOnlyList<TuningPoint> Curve { get; }

    /// <summary>
    /// The chosen setting as measured on the tuning queries: the cheapest whose interval's lower end meets the target,
    /// or, when none does, the one with the highest recall.
    /// </summary>
    public TuningPoint Chosen { get; }

    /// <summary>The chosen setting measured on the held-out queries: the recall to expect from the defaults.</summary>
    public TuningPoint HeldOut { get; }

    /// <summary>The index options' own settings (before any tuning) measured on the held-out queries.</summary>
    public TuningPoint UntunedHeldOut { get; }

    /// <summary>Whether the chosen setting met the target on the tuning queries (the lower end of its interval).</summary>
    public bool TargetMet { get; }

    /// <summary>Whether the search over settings finished within the time budget.</summary>
    public bool Completed { get; }

    /// <summary>Whether the chosen setting became the index's default.</summary>
    public bool Applied { get; }

    /// <summary>Queries the settings were chosen on.</summary>
    public int TuningQueries { get; }

    /// <summary>Queries kept out of the choice, which <see cref="HeldOut"/> is measured on.</summary>
    public int HeldOutQueries { get; }

    /// <summary>Whether the queries were drawn from the index's own vectors (the caller gave none).</summary>
    public bool QueriesDrawn { get; }

    /// <summary>A plain-text table of the curve, the choice and the held-out figures.</summary>
    /// <returns>Several lines of text.</returns>
    public override string ToString()
    {
        CultureInfo c = CultureInfo.InvariantCulture;
        var text = new StringBuilder();
        text.Append(c, $"target recall@{K} {TargetRecall:0.###} at {Confidence:P0} confidence; {TuningQueries} tuning and {HeldOutQueries} held-out queries ({(QueriesDrawn ? "drawn from the index" : "given")})\n");
        text.Append("width  depth  recall  interval         µs/query\n");
        foreach (TuningPoint p in Curve)
        {
            text.Append(c, $"{Cell(p.SearchWidth),5}  {Cell(p.RescoreDepth),5}  {p.Recall:0.0000}  [{p.RecallLow:0.0000}, {p.RecallHigh:0.0000}]  {p.MicrosecondsPerQuery,8:0.0}{(ReferenceEquals(p, Chosen) ? "  chosen" : string.Empty)}\n");
        }

        text.Append(c, $"held out: chosen {HeldOut.Recall:0.0000} [{HeldOut.RecallLow:0.0000}, {HeldOut.RecallHigh:0.0000}] at {HeldOut.MicrosecondsPerQuery:0.0} µs/query; untuned {UntunedHeldOut.Recall:0.0000} [{UntunedHeldOut.RecallLow:0.0000}, {UntunedHeldOut.RecallHigh:0.0000}] at {UntunedHeldOut.MicrosecondsPerQuery:0.0} µs/query\n");
        text.Append(TargetMet ? "target met" : "target not met by any setting measured").Append(Completed ? string.Empty : " (time budget spent)").Append(Applied ? "; applied as the index's defaults" : "; not applied");
        return text.ToString();

        static string Cell(int? value) => value?.ToString(CultureInfo.InvariantCulture) ?? "-";
    }
}
