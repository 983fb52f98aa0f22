namespace VectorKit.Indexes.Exact;

/// <summary>Options for building an <see cref="ExactIndex"/>.</summary>
/// <remarks>
/// Each property is checked when it is set; an out-of-range value throws an <see cref="ArgumentOutOfRangeException"/>
/// naming the option and its allowed range. Instances are immutable once built and may be shared.
/// </remarks>
public sealed class ExactIndexOptions
{
    private readonly int _initialCapacity;
    private readonly VectorStorage _storage = VectorStorage.Float32;
    private readonly int _rescoreDepth;
    private readonly FullVectorLocation _fullVectors = FullVectorLocation.InIndexMemory;

    /// <summary>The defaults: no space reserved up front, float32 storage, no re-scoring.</summary>
    public static ExactIndexOptions Default { get; } = new();

    /// <summary>Vectors to reserve space for up front, to avoid moving the storage while adding one at a time.</summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is negative.</exception>
    public int InitialCapacity
    {
        get => _initialCapacity;
        init
        {
            if (value < 0)
            {
                ThrowHelper.ThrowArgumentOutOfRange(nameof(InitialCapacity), value, "must be zero or positive");
            }

            _initialCapacity = value;
        }
    }

    /// <summary>
    /// How the vectors are stored and scanned: float32 (exact distances, no training) or one byte per component
    /// (<see cref="VectorStorage.Scalar8Bit"/>: a quarter of the memory, distances to the decoded codes, and
    /// <see cref="ExactIndex.Train"/> must run before the first add). Default <see cref="VectorStorage.Float32"/>.
    /// </summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is not a defined <see cref="VectorStorage"/>.</exception>
    public VectorStorage Storage
    {
        get => _storage;
        init
        {
            if (value is not (VectorStorage.Float32 or VectorStorage.Scalar8Bit))
            {
                ThrowHelper.ThrowArgumentOutOfRange(nameof(Storage), value, "must be Float32 or Scalar8Bit");
            }

            _storage = value;
        }
    }

    /// <summary>
    /// Under <see cref="VectorStorage.Scalar8Bit"/>, a positive value keeps every full float32 vector (in memory beside
    /// its code, or in an external source: <see cref="FullVectors"/>) and, by default, re-scores this many best candidates (by code distance) exactly before returning the
    /// best k; a search overrides the depth with <see cref="SearchOptions.RescoreDepth"/>. 0 (the default) keeps no
    /// full vectors, so distances are the codes' approximations. Ignored under <see cref="VectorStorage.Float32"/>,
    /// which is exact already.
    /// </summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is negative.</exception>
    public int RescoreDepth
    {
        get => _rescoreDepth;
        init
        {
            if (value < 0)
            {
                ThrowHelper.ThrowArgumentOutOfRange(nameof(RescoreDepth), value, "must be 0 (off) or positive");
            }

            _rescoreDepth = value;
        }
    }

    /// <summary>
    /// Where re-scoring (a positive <see cref="RescoreDepth"/> under <see cref="VectorStorage.Scalar8Bit"/>) reads full
    /// vectors: a copy kept in the index's memory (the default), or an <see cref="Indexes.IFullVectorSource"/> attached
    /// with <see cref="ExactIndex.AttachFullVectors"/>, such as a <c>VectorKit.IO.FileVectorSource</c> over the file the
    /// vectors came from. The external choice saves 4 × dimension bytes per vector of memory and of the index's file,
    /// at the cost of one read per re-scored candidate. Ignored when re-scoring is off, and under
    /// <see cref="VectorStorage.Float32"/>, whose rows are the full vectors.
    /// </summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is not a defined <see cref="FullVectorLocation"/>.</exception>
    public FullVectorLocation FullVectors
    {
        get => _fullVectors;
        init
        {
            if (value is not (FullVectorLocation.InIndexMemory or FullVectorLocation.ExternalSource))
            {
                ThrowHelper.ThrowArgumentOutOfRange(nameof(FullVectors), value, "must be InIndexMemory or ExternalSource");
            }

            _fullVectors = value;
        }
    }
}
