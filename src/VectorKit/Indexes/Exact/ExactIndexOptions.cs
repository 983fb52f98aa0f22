using VectorKit.Internal;

namespace VectorKit.Indexes.Exact;

/// <summary>Options for building an <see cref="ExactIndex"/>.</summary>
/// <remarks>
/// Each property is checked when it is set; an out-of-range value throws an <see cref="ArgumentOutOfRangeException"/>
/// naming the option and its allowed range. Instances are immutable once built and may be shared.
/// </remarks>
public sealed class ExactIndexOptions : VectorIndexOptions
{
    private readonly int _initialCapacity;

    /// <summary>The defaults: no space reserved up front, float32 encoding, no re-scoring.</summary>
    public static ExactIndexOptions Default { get; } = new();

    /// <summary>
    /// Vectors to reserve space for up front. Default 0; allowed 0 or more. Reserving the expected count avoids
    /// growing (and copying) the storage while adding one at a time, at the cost of holding that memory from the start.
    /// </summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is negative.</exception>
    public int InitialCapacity
    {
        get => _initialCapacity;
        init => _initialCapacity = OptionChecks.NonNegative(value, nameof(InitialCapacity));
    }

}
