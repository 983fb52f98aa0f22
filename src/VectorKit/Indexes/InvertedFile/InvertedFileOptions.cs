using VectorKit.Quantization;

namespace VectorKit.Indexes.InvertedFile;

/// <summary>Options for an <see cref="InvertedFileIndex"/>.</summary>
/// <remarks>
/// Each property is checked when it is set; an out-of-range value throws an <see cref="ArgumentOutOfRangeException"/>
/// naming the option and its allowed range. (Whether <see cref="ProductCodeBytes"/> divides the dimension is checked
/// by the index's constructor.) Instances are immutable once built and may be shared.
/// </remarks>
public sealed class InvertedFileOptions
{
    private readonly int _listCount = 1024;
    private readonly int _listsProbed = 16;
    private readonly ListStorage _storage = ListStorage.Float32;
    private readonly int _productCodeBytes = 16;
    private readonly int _rescoreDepth;
    private readonly FullVectorLocation _fullVectors = FullVectorLocation.InIndexMemory;
    private readonly int _trainingIterations = 20;
    private readonly int? _trainingSampleSize;
    private readonly int _trainingParallelism = -1;
    private readonly SubspaceRotation _productCodeRotation = SubspaceRotation.None;

    /// <summary>The defaults: 1,024 lists, 16 probed per query, float32 lists, no re-scoring.</summary>
    public static InvertedFileOptions Default { get; } = new();

    /// <summary>
    /// The number of lists, each around one centroid learnt by k-means. More lists make each list shorter (a probe
    /// reads less) and the centroid search longer; about √N to 4√N for N vectors is common practice. Default 1,024.
    /// </summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is outside [1, 1048576].</exception>
    public int ListCount
    {
        get => _listCount;
        init
        {
            if (value < 1 || value > 1 << 20)
            {
                ThrowHelper.ThrowArgumentOutOfRange(nameof(ListCount), value, "must be in [1, 1048576]");
            }

            _listCount = value;
        }
    }

    /// <summary>
    /// Lists probed per query by default: the query's nearest centroids' lists are scanned. More probes find more of
    /// the true neighbours and cost time in proportion. A search overrides it with <see cref="SearchOptions.SearchWidth"/>.
    /// Values above <see cref="ListCount"/> probe every list. Default 16.
    /// </summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is not positive.</exception>
    public int ListsProbed
    {
        get => _listsProbed;
        init
        {
            if (value < 1)
            {
                ThrowHelper.ThrowArgumentOutOfRange(nameof(ListsProbed), value, "must be positive");
            }

            _listsProbed = value;
        }
    }

    /// <summary>What the lists hold: float32 vectors, product-quantization codes, or 8-bit scalar codes. Default <see cref="ListStorage.Float32"/>.</summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is not a defined <see cref="ListStorage"/>.</exception>
    public ListStorage Storage
    {
        get => _storage;
        init
        {
            if (value is not (ListStorage.Float32 or ListStorage.ProductCodes or ListStorage.Scalar8Bit))
            {
                ThrowHelper.ThrowArgumentOutOfRange(nameof(Storage), value, "must be Float32, ProductCodes or Scalar8Bit");
            }

            _storage = value;
        }
    }

    /// <summary>
    /// Bytes per product-quantization code (the number of sub-spaces) under <see cref="ListStorage.ProductCodes"/>;
    /// it must divide the dimension (no padding). 8 to 64 is the usual range. Default 16.
    /// </summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is outside [1, 4096].</exception>
    public int ProductCodeBytes
    {
        get => _productCodeBytes;
        init
        {
            if (value < 1 || value > 4096)
            {
                ThrowHelper.ThrowArgumentOutOfRange(nameof(ProductCodeBytes), value, "must be in [1, 4096]");
            }

            _productCodeBytes = value;
        }
    }

    /// <summary>
    /// Under <see cref="ListStorage.ProductCodes"/>, an orthogonal rotation learnt with the product quantizer and applied
    /// to residuals before they are cut into sub-spaces (and to each query once per search). Ignored under the other
    /// storages. Default <see cref="SubspaceRotation.None"/>.
    /// </summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is not a defined <see cref="SubspaceRotation"/>.</exception>
    public SubspaceRotation ProductCodeRotation
    {
        get => _productCodeRotation;
        init
        {
            if (value is not (SubspaceRotation.None or SubspaceRotation.VarianceBalanced))
            {
                ThrowHelper.ThrowArgumentOutOfRange(nameof(ProductCodeRotation), value, "must be None or VarianceBalanced");
            }

            _productCodeRotation = value;
        }
    }

    /// <summary>
    /// Under compressed storage, a positive value keeps every full float32 vector (in memory beside its code, or in an
    /// external source: <see cref="FullVectors"/>) and, by default, re-scores this many best candidates (by code distance) exactly before returning the best k; a search
    /// overrides the depth with <see cref="SearchOptions.RescoreDepth"/>. 0 (the default) keeps no full vectors, so
    /// distances are the codes' approximations. Ignored under <see cref="ListStorage.Float32"/>, which is exact already.
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
    /// Where re-scoring (a positive <see cref="RescoreDepth"/> under compressed storage) reads full vectors: a copy kept
    /// in the index's memory (the default), or an <see cref="Indexes.IFullVectorSource"/> attached with
    /// <see cref="InvertedFileIndex.AttachFullVectors"/>, such as a <c>VectorKit.IO.FileVectorSource</c> over the file the
    /// vectors came from. The external choice saves 4 × dimension bytes per vector of memory and of the index's file,
    /// at the cost of one read per re-scored candidate. Ignored when re-scoring is off.
    /// </summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is not a defined <see cref="Indexes.FullVectorLocation"/>.</exception>
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

    /// <summary>The most k-means iterations for the centroids (and for each product-quantizer sub-space). Default 20.</summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is outside [0, 10000].</exception>
    public int TrainingIterations
    {
        get => _trainingIterations;
        init
        {
            if (value < 0 || value > 10_000)
            {
                ThrowHelper.ThrowArgumentOutOfRange(nameof(TrainingIterations), value, "must be in [0, 10000]");
            }

            _trainingIterations = value;
        }
    }

    /// <summary>
    /// The most training rows k-means uses for the centroids (a uniform sample of what <see cref="InvertedFileIndex.Train"/>
    /// receives); <see langword="null"/> (the default) means 64 per list, a common-practice size that keeps training
    /// fast. The residual quantizer trains on at most 65,536 rows.
    /// </summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is not positive.</exception>
    public int? TrainingSampleSize
    {
        get => _trainingSampleSize;
        init
        {
            if (value is <= 0)
            {
                ThrowHelper.ThrowArgumentOutOfRange(nameof(TrainingSampleSize), value.Value, "must be positive");
            }

            _trainingSampleSize = value;
        }
    }

    /// <summary>The seed of every random choice in training: the same sample and seed give the same index. Default 42.</summary>
    public int Seed { get; init; } = 42;

    /// <summary>The most threads training and bulk adds use; -1 (the default) means one per core.</summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is 0 or less than -1.</exception>
    public int TrainingParallelism
    {
        get => _trainingParallelism;
        init
        {
            if (value == 0 || value < -1)
            {
                ThrowHelper.ThrowArgumentOutOfRange(nameof(TrainingParallelism), value, "must be -1 (all cores) or a positive thread count");
            }

            _trainingParallelism = value;
        }
    }

    /// <summary>Whether the index re-scores: compressed storage and a positive depth.</summary>
    internal bool Rescores => _storage != ListStorage.Float32 && _rescoreDepth > 0;

    /// <summary>Whether the index keeps the full vectors itself.</summary>
    internal bool KeepsFullInMemory => Rescores && _fullVectors == FullVectorLocation.InIndexMemory;

    /// <summary>Whether re-scoring reads an attached source.</summary>
    internal bool ReadsExternally => Rescores && _fullVectors == FullVectorLocation.ExternalSource;

    internal int EffectiveTrainingSampleSize => _trainingSampleSize ?? (int)Math.Min(int.MaxValue, 64L * _listCount);

    internal int EffectiveParallelism => _trainingParallelism == -1 ? Environment.ProcessorCount : _trainingParallelism;
}
