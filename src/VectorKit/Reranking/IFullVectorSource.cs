namespace VectorKit.Reranking;

/// <summary>
/// Full-precision vectors by id, for the exact re-scoring stage of a <see cref="RerankingPipeline{TQuery}"/> over an
/// index whose own distances are approximate (a compressed index). Without one, the pipeline reads vectors back
/// from the index with <see cref="Indexes.IVectorIndex.TryGetVector"/>.
/// </summary>
/// <remarks>
/// Called concurrently from several threads; implementations must be thread-safe. Compressed indexes whose options say
/// <see cref="Indexes.FullVectorLocation.ExternalSource"/> re-score from one too (<see cref="Indexes.IExternalFullVectors"/>);
/// <see cref="IO.FileVectorSource"/> reads the vectors from a file on demand.
/// </remarks>
public interface IFullVectorSource
{
    /// <summary>Components per vector; must equal the index's dimension.</summary>
    int Dimension { get; }

    /// <summary>Copies the full vector of <paramref name="id"/> into <paramref name="destination"/>.</summary>
    /// <param name="id">An item id.</param>
    /// <param name="destination">Receives <see cref="Dimension"/> components.</param>
    /// <returns><see langword="false"/> when the source has no vector for the id.</returns>
    bool TryGetVector(long id, Span<float> destination);
}
