using System.Globalization;

namespace VectorKit.Evaluation;

/// <summary>How well and how fast an index answered a query set: the result of <see cref="SearchQuality.Measure"/>.</summary>
/// <param name="Recall">Mean recall@<paramref name="K"/> against the ground truth, in [0, 1] (see <see cref="Evaluation.Recall"/>).</param>
/// <param name="QueriesPerSecond">Queries answered per second of wall-clock time by one batch search.</param>
/// <param name="BuildTime">Wall-clock time to add the whole data set to the empty index.</param>
/// <param name="SearchTime">Wall-clock time of the batch search.</param>
/// <param name="BytesPerVector">The index's <c>MemoryBytes</c> divided by its vector count, after the build.</param>
/// <param name="K">Results asked for per query, and the recall cut-off.</param>
/// <param name="QueryCount">Queries searched.</param>
/// <param name="VectorCount">Vectors in the index after the build.</param>
/// <param name="ThreadCount">The most threads the batch search was allowed.</param>
public sealed record SearchQualityReport(
    double Recall,
    double QueriesPerSecond,
    TimeSpan BuildTime,
    TimeSpan SearchTime,
    double BytesPerVector,
    int K,
    int QueryCount,
    int VectorCount,
    int ThreadCount)
{
    /// <summary>A one-line summary, culture-invariant, e.g. <c>recall@10 0.9870 | 41,250 queries/s (1,000 queries, 2 threads) | build 0.85 s (20,000 vectors) | 540.2 bytes/vector</c>.</summary>
    /// <returns>The summary line.</returns>
    public override string ToString() => string.Create(
        CultureInfo.InvariantCulture,
        $"recall@{K} {Recall:0.0000} | {QueriesPerSecond:#,0} queries/s ({QueryCount:#,0} queries, {ThreadCount} {(ThreadCount == 1 ? "thread" : "threads")}) | build {BuildTime.TotalSeconds:0.00} s ({VectorCount:#,0} vectors) | {BytesPerVector:0.0} bytes/vector");
}
