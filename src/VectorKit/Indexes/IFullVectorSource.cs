namespace VectorKit.Indexes;

/// <summary>
/// Full-precision vectors by id, read by the exact re-scoring stage of a compressed index (options with
/// <see cref="FullVectorLocation.ExternalSource"/>, see <see cref="IExternalFullVectors"/>) and by the re-ranking
/// pipeline over an index whose own distances are approximate.
/// </summary>
/// <remarks>
/// Called concurrently from several threads; implementations must be thread-safe. The library's file-backed
/// implementation (<c>VectorKit.IO.FileVectorSource</c>) reads the vectors from a file on demand.
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
