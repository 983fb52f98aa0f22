using VectorKit.Internal;
using VectorKit.Quantization;

namespace VectorKit.Indexes.InvertedFile;

/// <summary>Options for an <see cref="InvertedFileIndex"/>.</summary>
/// <remarks>
/// Each property is checked when it is set; an out-of-range value throws an <see cref="ArgumentOutOfRangeException"/>
/// naming the option and its allowed range. (Whether <see cref="ProductCodeBytes"/> divides the dimension is checked
/// by the index's constructor.) Instances are immutable once built and may be shared.
/// </remarks>
public sealed class InvertedFileOptions : VectorIndexOptions
{
    private readonly int _listCount = 1024;
    private readonly int _searchWidth = 16;
    private readonly int _productCodeBytes = 16;
    private readonly int _maxIterations = 20;
    private readonly int? _sampleSize;
    private readonly int _maxDegreeOfParallelism = -1;
    private readonly SubspaceRotation _productCodeRotation = SubspaceRotation.None;
    private readonly ProductCodeLayout _productCodeLayout = ProductCodeLayout.BytePerSubspace;

    /// <summary>The defaults: 1,024 lists, 16 probed per query, float32 lists, no re-scoring.</summary>
    public static InvertedFileOptions Default { get; } = new();

    /// <summary>
    /// The number of lists, each around one centroid learnt by k-means. Default 1,024; allowed 1 to 1,048,576. More
    /// lists make each list shorter (a probe reads less) and the centroid search and training longer; about √N to 4√N
    /// for N vectors is common practice.
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
    /// Lists probed per query by default: the query's nearest centroids' lists are scanned. Default 16; allowed 1 or
    /// more, and values above <see cref="ListCount"/> probe every list. More probes find more of the true neighbours
    /// and cost time in proportion. A search overrides it with <see cref="SearchOptions.SearchWidth"/>.
    /// </summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is not positive.</exception>
    public int SearchWidth
    {
        get => _searchWidth;
        init => _searchWidth = OptionChecks.Positive(value, nameof(SearchWidth));
    }

    /// <summary>
    /// Bytes per product-quantization code (the number of sub-spaces) under <see cref="VectorEncoding.ProductCodes"/>;
    /// it must divide the dimension (no padding). Default 16; allowed 1 to 4,096, 8 to 64 being the usual range. More
    /// bytes give closer distances and cost memory and scan time in proportion. Ignored under the other storages.
    /// </summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is outside [1, 4096].</exception>
    public int ProductCodeBytes
    {
        get => _productCodeBytes;
        init => _productCodeBytes = OptionChecks.InRange(value, 1, 4096, nameof(ProductCodeBytes));
    }

    /// <summary>
    /// Under <see cref="VectorEncoding.ProductCodes"/>, an orthogonal rotation learnt with the product quantizer and applied
    /// to residuals before they are cut into sub-spaces (and to each query once per search). Default
    /// <see cref="SubspaceRotation.None"/>; allowed <see cref="SubspaceRotation.None"/> or
    /// <see cref="SubspaceRotation.VarianceBalanced"/>. A rotation spreads the variance evenly over the sub-spaces,
    /// which usually makes codes more accurate, at the cost of longer training and one rotation per query. Ignored under
    /// the other storages.
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
    /// Under <see cref="VectorEncoding.ProductCodes"/>, how codes are laid out and scanned. Default
    /// <see cref="ProductCodeLayout.BytePerSubspace"/>; <see cref="ProductCodeLayout.FourBitFastScan"/> scans several
    /// times faster at the same <see cref="ProductCodeBytes"/> with coarser distances (twice the sub-spaces, 16 codewords
    /// each), to be used with re-scoring; its <see cref="ProductCodeBytes"/> times two must divide the dimension.
    /// Ignored under the other storages.
    /// </summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is not a defined <see cref="InvertedFile.ProductCodeLayout"/>.</exception>
    public ProductCodeLayout ProductCodeLayout
    {
        get => _productCodeLayout;
        init
        {
            if (value is not (ProductCodeLayout.BytePerSubspace or ProductCodeLayout.FourBitFastScan))
            {
                ThrowHelper.ThrowArgumentOutOfRange(nameof(ProductCodeLayout), value, "must be BytePerSubspace or FourBitFastScan");
            }

            _productCodeLayout = value;
        }
    }

    /// <summary>
    /// The most k-means iterations for the centroids (and for each product-quantizer sub-space). Default 20; allowed 0
    /// to 10,000. More iterations can place centroids better and make training slower; k-means stops earlier once
    /// the centroids settle.
    /// </summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is outside [0, 10000].</exception>
    public int MaxIterations
    {
        get => _maxIterations;
        init => _maxIterations = OptionChecks.InRange(value, 0, 10_000, nameof(MaxIterations));
    }

    /// <summary>
    /// The most training rows k-means uses for the centroids (a uniform sample of what <see cref="InvertedFileIndex.Train"/>
    /// receives); <see langword="null"/> (the default) means 64 per list, a common-practice size that keeps training
    /// fast; otherwise 1 or more. A larger sample places centroids more faithfully and makes training slower. The
    /// residual quantizer trains on at most 65,536 rows.
    /// </summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is not positive.</exception>
    public int? SampleSize
    {
        get => _sampleSize;
        init
        {
            if (value is <= 0)
            {
                ThrowHelper.ThrowArgumentOutOfRange(nameof(SampleSize), value.Value, "must be positive");
            }

            _sampleSize = value;
        }
    }

    /// <summary>
    /// The seed of every random choice in training: the same sample and seed give the same index. Default 42; any
    /// value. It changes which centroids are found, not their expected quality.
    /// </summary>
    public int Seed { get; init; } = 42;

    /// <summary>
    /// The most threads training and bulk adds use. Default -1, meaning one per core; otherwise 1 or more. Fewer
    /// threads leave cores to concurrent work and make training and bulk adds slower.
    /// </summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is 0 or less than -1.</exception>
    public int MaxDegreeOfParallelism
    {
        get => _maxDegreeOfParallelism;
        init => _maxDegreeOfParallelism = OptionChecks.Parallelism(value, nameof(MaxDegreeOfParallelism));
    }

    /// <inheritdoc/>
    /// <remarks>The inverted-file index offers every encoding: float32, 8-bit and product codes.</remarks>
    protected override bool IsOffered(VectorEncoding encoding) => true;

    /// <summary>Whether lists hold four-bit fast-scan blocks.</summary>
    internal bool UsesFastScan => Encoding == VectorEncoding.ProductCodes && _productCodeLayout == ProductCodeLayout.FourBitFastScan;

    internal int EffectiveSampleSize => _sampleSize ?? (int)Math.Min(int.MaxValue, 64L * _listCount);

    internal int EffectiveParallelism => _maxDegreeOfParallelism == -1 ? Environment.ProcessorCount : _maxDegreeOfParallelism;
}
