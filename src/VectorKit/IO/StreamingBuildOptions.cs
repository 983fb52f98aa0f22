using VectorKit.Internal;

namespace VectorKit.IO;

/// <summary>How a <see cref="StreamingBuild"/> samples, trains and reads.</summary>
/// <remarks>Each property is checked when it is set. Instances are immutable and may be shared between threads.</remarks>
public sealed class StreamingBuildOptions
{
    private readonly int _blockRows = 8192;
    private readonly int _sampleSize = 100_000;
    private readonly TrainingRowPick _trainingRows = TrainingRowPick.Strided;

    /// <summary>Blocks of 8,192 rows, 100,000 strided training rows, seed 42, default read limits.</summary>
    public static StreamingBuildOptions Default { get; } = new();

    /// <summary>Rows read and added at a time, 1 to 1,048,576. Default 8,192. The block buffer holds this many float32 rows.</summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is outside [1, 1048576].</exception>
    public int BlockRows
    {
        get => _blockRows;
        init => _blockRows = OptionChecks.InRange(value, 1, 1 << 20, nameof(BlockRows));
    }

    /// <summary>
    /// Training rows, at least 1 (the index names its own minimum, for example one per inverted-file list); a file with
    /// fewer rows trains on all of them. Default 100,000. The sample is held as float32 rows during training only.
    /// </summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is not positive.</exception>
    public int SampleSize
    {
        get => _sampleSize;
        init => _sampleSize = OptionChecks.Positive(value, nameof(SampleSize));
    }

    /// <summary>Which rows train: <see cref="TrainingRowPick.Strided"/> (default) or <see cref="TrainingRowPick.Random"/>.</summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is not a defined <see cref="TrainingRowPick"/>.</exception>
    public TrainingRowPick TrainingRows
    {
        get => _trainingRows;
        init
        {
            if (value is not (TrainingRowPick.Strided or TrainingRowPick.Random))
            {
                ThrowHelper.ThrowArgumentOutOfRange(nameof(TrainingRows), value, "must be Strided or Random");
            }

            _trainingRows = value;
        }
    }

    /// <summary>Seed of the <see cref="TrainingRowPick.Random"/> draw; the same seed and file give the same rows. Default 42.</summary>
    public int Seed { get; init; } = 42;

    /// <summary>Caps on the file's dimension and row count; <see langword="null"/> for <see cref="DataReadLimits.Default"/>.</summary>
    public DataReadLimits? Limits { get; init; }
}
