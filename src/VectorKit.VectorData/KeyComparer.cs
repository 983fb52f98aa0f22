namespace VectorKit.VectorData;

/// <summary>
/// Compares record keys. Integer keys hash through <see cref="HashCode"/> (seeded per process) rather than their own
/// hash, which folds a 64-bit value's halves together: keys read from a file could otherwise be chosen to collide.
/// Strings compare ordinally; their hash is already randomised.
/// </summary>
internal sealed class KeyComparer : IEqualityComparer<object>
{
    public static KeyComparer Instance { get; } = new();

    public new bool Equals(object? x, object? y) => x is string s && y is string t ? string.Equals(s, t, StringComparison.Ordinal) : object.Equals(x, y);

    public int GetHashCode(object obj) => obj switch
    {
        long l => HashCode.Combine(l),
        int i => HashCode.Combine(i),
        _ => obj.GetHashCode(),
    };
}
