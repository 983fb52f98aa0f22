namespace VectorKit.Indexes;

/// <summary>
/// The options every index kind shares: how vectors are encoded, and whether (and from where) the best candidates of a
/// compressed encoding are re-scored on the full vectors.
/// </summary>
/// <remarks>
/// Each property is checked when it is set; an out-of-range value throws an <see cref="ArgumentOutOfRangeException"/>
/// naming the option and its allowed range. Instances are immutable once built and may be shared between indexes and
/// threads.
/// </remarks>
public abstract class VectorIndexOptions
{
    /// <summary>The largest <see cref="RescoreDepth"/>: a search keeps that many candidates in memory.</summary>
    public const int MaxRescoreDepth = 100_000;

    private readonly VectorEncoding _encoding = VectorEncoding.Float32;
    private readonly int _rescoreDepth;
    private readonly FullVectorLocation _fullVectors = FullVectorLocation.InIndexMemory;

    /// <summary>Creates options with float32 encoding and no re-scoring.</summary>
    protected VectorIndexOptions()
    {
    }

    /// <summary>
    /// How the vectors are held and searched: <see cref="VectorEncoding.Float32"/> (the default: exact distances, no
    /// training), or a compressed encoding that the index must learn with <see cref="ITrainableIndex.Train"/> before
    /// the first add. Each index kind names the encodings it offers. A compressed encoding makes the index smaller and
    /// its scans read fewer bytes, at the cost of approximate distances (see <see cref="RescoreDepth"/>).
    /// </summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is not an encoding this index kind offers.</exception>
    public VectorEncoding Encoding
    {
        get => _encoding;
        init
        {
            if (!Enum.IsDefined(value) || !IsOffered(value))
            {
                string offered = string.Join(", ", Enum.GetValues<VectorEncoding>().Where(IsOffered));
                ThrowHelper.ThrowArgumentOutOfRange(nameof(Encoding), value, $"must be one of {offered} for {GetType().Name}");
            }

            _encoding = value;
        }
    }

    /// <summary>
    /// Under a compressed <see cref="Encoding"/>, a positive value keeps every full float32 vector (in the index's
    /// memory or in an external source: <see cref="FullVectors"/>) and, by default, re-scores this many best candidates
    /// (by code distance) exactly before the best k are returned; a search overrides the depth with
    /// <see cref="SearchOptions.RescoreDepth"/>. 0 (the default) keeps no full vectors, so distances are the codes'
    /// approximations; allowed 0 to <see cref="MaxRescoreDepth"/>. A deeper re-score recovers more of the neighbours
    /// the codes misrank and costs one full-vector distance per candidate. Ignored under
    /// <see cref="VectorEncoding.Float32"/>, which is exact already.
    /// </summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is outside [0, <see cref="MaxRescoreDepth"/>].</exception>
    public int RescoreDepth
    {
        get => _rescoreDepth;
        init
        {
            if (value < 0 || value > MaxRescoreDepth)
            {
                ThrowHelper.ThrowArgumentOutOfRange(nameof(RescoreDepth), value, $"must be 0 (off) or in [1, {MaxRescoreDepth}]");
            }

            _rescoreDepth = value;
        }
    }

    /// <summary>
    /// Where re-scoring (a positive <see cref="RescoreDepth"/> under a compressed <see cref="Encoding"/>) reads full
    /// vectors: a copy kept in the index's memory (the default), or an <see cref="IFullVectorSource"/> attached with
    /// <see cref="IExternalFullVectors.AttachFullVectors"/>, such as a <c>VectorKit.IO.FileVectorSource</c> over the
    /// file the vectors came from. Default <see cref="FullVectorLocation.InIndexMemory"/>. The external choice saves
    /// 4 × dimension bytes per vector of memory and of the index's file, at the cost of one read per re-scored
    /// candidate. Ignored when re-scoring is off.
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

    /// <summary>Whether searches re-score by default: a compressed encoding and a positive depth.</summary>
    internal bool Rescores => _encoding != VectorEncoding.Float32 && _rescoreDepth > 0;

    /// <summary>Whether the index keeps the full vectors in its own memory beside the codes.</summary>
    internal bool KeepsFullVectorsInMemory => Rescores && _fullVectors == FullVectorLocation.InIndexMemory;

    /// <summary>Whether re-scoring reads an attached source.</summary>
    internal bool ReadsFullVectorsExternally => Rescores && _fullVectors == FullVectorLocation.ExternalSource;

    /// <summary>Whether this index kind offers <paramref name="encoding"/>; float32 and 8-bit codes unless a kind says otherwise.</summary>
    /// <param name="encoding">A defined encoding.</param>
    /// <returns><see langword="true"/> when the kind can hold vectors so.</returns>
    protected virtual bool IsOffered(VectorEncoding encoding) => encoding is VectorEncoding.Float32 or VectorEncoding.Scalar8Bit;
}
