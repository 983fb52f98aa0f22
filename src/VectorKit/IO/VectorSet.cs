namespace VectorKit.IO;

/// <summary>A set of float vectors of one dimension, stored row-major in a single array (see <see cref="RowSet{T}"/>).</summary>
public sealed class VectorSet : RowSet<float>
{
    /// <summary>Creates a zero-filled set of <paramref name="count"/> vectors of <paramref name="dimension"/> values.</summary>
    /// <param name="count">The number of vectors, 0 or more.</param>
    /// <param name="dimension">The number of values per row, 1 or more (0 is allowed only when <paramref name="count"/> is 0).</param>
    /// <exception cref="ArgumentOutOfRangeException">
    /// <paramref name="count"/> is negative, <paramref name="dimension"/> is invalid, or the set would exceed the largest array.
    /// </exception>
    public VectorSet(int count, int dimension)
        : base(count, dimension)
    {
    }

    /// <summary>Wraps an existing row-major array without copying it; later changes to the array show through.</summary>
    /// <param name="data">The values, row after row.</param>
    /// <param name="dimension">The number of values per row, 1 or more (0 is allowed only when <paramref name="data"/> is empty).</param>
    /// <exception cref="ArgumentNullException"><paramref name="data"/> is <see langword="null"/>.</exception>
    /// <exception cref="ArgumentOutOfRangeException"><paramref name="dimension"/> is invalid.</exception>
    /// <exception cref="ArgumentException">The length of <paramref name="data"/> is not a multiple of <paramref name="dimension"/>.</exception>
    public VectorSet(float[] data, int dimension)
        : base(data, dimension)
    {
    }
}
