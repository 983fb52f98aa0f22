namespace VectorKit.IO;

/// <summary>
/// Caps applied while reading a data file, so a hostile or corrupt header cannot make a reader allocate or loop
/// without bound. A header that exceeds a cap raises <see cref="DataFormatException"/>.
/// </summary>
/// <remarks>
/// Independently of these caps, every reader checks the sizes a header claims against the bytes that remain in
/// the stream whenever the stream's length is known (a seekable, uncompressed stream), before allocating.
/// Instances are immutable and may be shared.
/// </remarks>
public sealed class DataReadLimits
{
    private readonly int _maxDimension = 1 << 24;
    private readonly long _maxRows = int.MaxValue;

    /// <summary>The default caps: dimension at most 2^24, at most <see cref="int.MaxValue"/> rows.</summary>
    public static DataReadLimits Default { get; } = new();

    /// <summary>The largest number of components per vector a file may declare. Defaults to 2^24 (16 777 216).</summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is less than 1.</exception>
    public int MaxDimension
    {
        get => _maxDimension;
        init
        {
            if (value < 1)
            {
                DataFormatThrow.ArgumentOutOfRange(nameof(MaxDimension), value, "must be at least 1");
            }

            _maxDimension = value;
        }
    }

    /// <summary>The largest number of vectors a file may declare. Defaults to <see cref="int.MaxValue"/>.</summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is negative.</exception>
    public long MaxRows
    {
        get => _maxRows;
        init
        {
            if (value < 0)
            {
                DataFormatThrow.ArgumentOutOfRange(nameof(MaxRows), value, "must not be negative");
            }

            _maxRows = value;
        }
    }
}
