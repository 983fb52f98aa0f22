using VectorKit.Internal;

namespace VectorKit.Quantization;

/// <summary>Options for training a <see cref="ProductQuantizer"/>.</summary>
/// <remarks>Each property is checked when it is set; instances are immutable once built and may be shared.</remarks>
public sealed class ProductQuantizerOptions
{
    private readonly int _codeBytes = 16;
    private readonly int _maxIterations = 20;
    private readonly int _sampleSize = 65_536;
    private readonly int _maxDegreeOfParallelism = -1;
    private readonly SubspaceRotation _rotation = SubspaceRotation.None;

    /// <summary>The defaults: 16-byte codes, 20 k-means iterations per sub-space, a sample of 65,536 rows, seed 42.</summary>
    public static ProductQuantizerOptions Default { get; } = new();

    /// <summary>
    /// Bytes per code, which is also the number of sub-spaces: each sub-space of <c>dimension / CodeBytes</c>
    /// components is quantized to one of 256 codewords (one byte). It must divide the dimension; 8 to 64 bytes is
    /// the usual range. Default 16.
    /// </summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is outside [1, 4096].</exception>
    public int CodeBytes
    {
        get => _codeBytes;
        init => _codeBytes = OptionChecks.InRange(value, 1, 4096, nameof(CodeBytes));
    }

    /// <summary>The most k-means iterations per sub-space codebook. Default 20.</summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is outside [0, 10000].</exception>
    public int MaxIterations
    {
        get => _maxIterations;
        init => _maxIterations = OptionChecks.InRange(value, 0, 10_000, nameof(MaxIterations));
    }

    /// <summary>The most training rows used (sampled uniformly when there are more). Default 65,536 (256 per codeword, common practice).</summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is below 256, the number of codewords.</exception>
    public int SampleSize
    {
        get => _sampleSize;
        init
        {
            if (value < ProductQuantizer.CodewordsPerSubspace)
            {
                ThrowHelper.ThrowArgumentOutOfRange(nameof(SampleSize), value, $"must be at least {ProductQuantizer.CodewordsPerSubspace}");
            }

            _sampleSize = value;
        }
    }

    /// <summary>
    /// An orthogonal rotation learnt from the training rows and applied before the vector is cut into sub-spaces.
    /// Default <see cref="SubspaceRotation.None"/>.
    /// </summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is not a defined <see cref="SubspaceRotation"/>.</exception>
    public SubspaceRotation Rotation
    {
        get => _rotation;
        init
        {
            if (value is not (SubspaceRotation.None or SubspaceRotation.VarianceBalanced))
            {
                ThrowHelper.ThrowArgumentOutOfRange(nameof(Rotation), value, "must be None or VarianceBalanced");
            }

            _rotation = value;
        }
    }

    /// <summary>The seed of sampling and of each sub-space's k-means++ seeding. Default 42.</summary>
    public int Seed { get; init; } = 42;

    /// <summary>The most threads training and bulk encoding use (sub-spaces train in parallel); -1 (the default) means one per core.</summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is 0 or less than -1.</exception>
    public int MaxDegreeOfParallelism
    {
        get => _maxDegreeOfParallelism;
        init => _maxDegreeOfParallelism = OptionChecks.Parallelism(value, nameof(MaxDegreeOfParallelism));
    }

    internal int EffectiveParallelism => _maxDegreeOfParallelism == -1 ? Environment.ProcessorCount : _maxDegreeOfParallelism;
}
