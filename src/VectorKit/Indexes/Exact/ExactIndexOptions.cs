namespace VectorKit.Indexes.Exact;

/// <summary>Options for building an <see cref="ExactIndex"/>.</summary>
public sealed class ExactIndexOptions
{
    private readonly int _initialCapacity;

    /// <summary>The defaults: no space reserved up front.</summary>
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
}
