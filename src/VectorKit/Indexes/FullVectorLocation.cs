namespace VectorKit.Indexes;

/// <summary>Where a compressed index's exact re-scoring stage reads the full float32 vectors.</summary>
public enum FullVectorLocation
{
    /// <summary>The index keeps a copy of every full vector in its own memory (4 × dimension bytes each) and saves it with the index.</summary>
    InIndexMemory = 0,

    /// <summary>
    /// The index keeps no full vectors: re-scoring reads them from an <see cref="Indexes.IFullVectorSource"/> attached
    /// with <see cref="IExternalFullVectors.AttachFullVectors"/> (for example a <c>VectorKit.IO.FileVectorSource</c>).
    /// The source must hold the vector of every id added; the index's file records the location but not the vectors.
    /// </summary>
    ExternalSource = 1,
}
