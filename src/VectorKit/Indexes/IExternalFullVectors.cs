
namespace VectorKit.Indexes;

/// <summary>
/// An index that can re-score its candidates from full vectors held outside it (options with
/// <see cref="FullVectorLocation.ExternalSource"/>). A loaded index has no source until one is attached.
/// </summary>
/// <remarks>
/// While re-scoring is on (a positive re-scoring depth) and no source is attached, searches throw
/// <see cref="InvalidOperationException"/> rather than silently return approximate distances; a search with a
/// re-scoring depth of 0 needs no source. The index does not own the source: dispose the source after the index.
/// </remarks>
public interface IExternalFullVectors
{
    /// <summary>The attached source, or <see langword="null"/>.</summary>
    IFullVectorSource? FullVectorSource { get; }

    /// <summary>Whether re-scoring reads full vectors from an attached source (<see cref="FullVectorLocation.ExternalSource"/> with re-scoring on).</summary>
    bool ReadsFullVectorsExternally { get; }

    /// <summary>Attaches (or replaces) the source re-scoring reads full vectors from; waits for running searches.</summary>
    /// <param name="source">Full vectors by id, of the index's dimension; under cosine the rows may have any length (they are normalised as read).</param>
    /// <exception cref="ArgumentNullException"><paramref name="source"/> is <see langword="null"/>.</exception>
    /// <exception cref="ArgumentException">The source's dimension differs from the index's.</exception>
    /// <exception cref="InvalidOperationException">The index does not read full vectors externally (see <see cref="ReadsFullVectorsExternally"/>).</exception>
    /// <exception cref="ObjectDisposedException">The index was disposed.</exception>
    void AttachFullVectors(IFullVectorSource source);
}
