namespace VectorKit.Reranking;

/// <summary>
/// The caller's pairwise scorer: scores one query against a batch of candidate items, and maps the query to the
/// vector the index retrieves candidates with. Derive from it to plug a model (an MLP, a bilinear form, a
/// cross-encoder, a call to another service) into a <see cref="RerankingPipeline{TQuery}"/>.
/// </summary>
/// <typeparam name="TQuery">The caller's own query type: a session, a question, a photo, a record.</typeparam>
/// <remarks>
/// <para><b>Convention: a higher score is better.</b> Scores are relevances, not distances: the pipeline keeps the
/// candidates with the highest scores, ties broken by ascending id. Every score must be a finite number.</para>
/// <para><b>Batches.</b> The pipeline hands over up to <see cref="RerankingOptions.ScoringBatchSize"/> candidates per
/// call, so a model can score them in one vectorised pass.</para>
/// <para><b>Thread safety.</b> The pipeline and the calibration call every member concurrently from several threads
/// (one query per thread at a time); implementations must be thread-safe.</para>
/// </remarks>
public abstract class PairwiseScorer<TQuery>
{
    /// <summary>Writes the vector the index retrieves candidates for <paramref name="query"/> with.</summary>
    /// <param name="query">The query.</param>
    /// <param name="destination">Exactly the index's dimension: write every component (finite values).</param>
    public abstract void WriteRetrievalVector(TQuery query, Span<float> destination);

    /// <summary>Scores <paramref name="query"/> against each candidate; higher is better.</summary>
    /// <param name="query">The query.</param>
    /// <param name="candidateIds">The ids of the items to score.</param>
    /// <param name="scores">Receives one finite score per candidate, in the same order; as long as <paramref name="candidateIds"/>.</param>
    /// <returns>
    /// The number of scores written, which must equal <c>candidateIds.Length</c>: a different count is reported as
    /// an error naming the query and stage, so a model that silently truncates a batch is caught.
    /// </returns>
    public abstract int Score(TQuery query, ReadOnlySpan<long> candidateIds, Span<float> scores);

    /// <summary>
    /// The asynchronous form of <see cref="Score"/>, used by <see cref="RerankingPipeline{TQuery}.RerankAsync"/> and
    /// <see cref="RerankingPipeline{TQuery}.RerankBatchAsync"/>. Override it when scoring waits on something outside
    /// the process (a model server, another service); the default runs <see cref="Score"/> synchronously.
    /// </summary>
    /// <param name="query">The query.</param>
    /// <param name="candidateIds">The ids of the items to score; valid until the returned task completes.</param>
    /// <param name="scores">Receives one finite score per candidate, in the same order.</param>
    /// <param name="cancellationToken">Cancels the scoring.</param>
    /// <returns>The number of scores written, which must equal <c>candidateIds.Length</c>.</returns>
    public virtual ValueTask<int> ScoreAsync(TQuery query, ReadOnlyMemory<long> candidateIds, Memory<float> scores, CancellationToken cancellationToken)
    {
        cancellationToken.ThrowIfCancellationRequested();
        return ValueTask.FromResult(Score(query, candidateIds.Span, scores.Span));
    }
}
