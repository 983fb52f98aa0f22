namespace VectorKit.IO;

/// <summary>
/// Rows of one length stored row-major in a single array: row <c>i</c> is
/// <c>Data[i * Dimension .. (i + 1) * Dimension]</c>. The shared shape of <see cref="VectorSet"/> (float vectors)
/// and <see cref="IntVectorSet"/> (int32 rows such as neighbour ids or labels).
/// </summary>
/// <typeparam name="T">The element type.</typeparam>
/// <remarks>
/// A set read from an empty file has <see cref="Count"/> 0 and, when the file cannot say otherwise,
/// <see cref="Dimension"/> 0. In every other case <see cref="Dimension"/> is at least 1.
/// </remarks>
public abstract class RowSet<T>
    where T : unmanaged
{
    /// <summary>Creates a zero-filled set of <paramref name="count"/> rows of <paramref name="dimension"/> values.</summary>
    /// <param name="count">The number of rows, 0 or more.</param>
    /// <param name="dimension">The number of values per row, 1 or more (0 is allowed only when <paramref name="count"/> is 0).</param>
    /// <exception cref="ArgumentOutOfRangeException">
    /// <paramref name="count"/> is negative, <paramref name="dimension"/> is invalid, or the set would exceed the largest array.
    /// </exception>
    private protected RowSet(int count, int dimension)
    {
        Data = new T[MatrixShape.CheckedLength(count, dimension)];
        Count = count;
        Dimension = dimension;
    }

    /// <summary>Wraps an existing row-major array without copying it; later changes to the array show through.</summary>
    /// <param name="data">The values, row after row.</param>
    /// <param name="dimension">The number of values per row, 1 or more (0 is allowed only when <paramref name="data"/> is empty).</param>
    /// <exception cref="ArgumentNullException"><paramref name="data"/> is <see langword="null"/>.</exception>
    /// <exception cref="ArgumentOutOfRangeException"><paramref name="dimension"/> is invalid.</exception>
    /// <exception cref="ArgumentException">The length of <paramref name="data"/> is not a multiple of <paramref name="dimension"/>.</exception>
    private protected RowSet(T[] data, int dimension)
    {
        if (data is null)
        {
            DataFormatThrow.ArgumentNull(nameof(data));
        }

        Count = MatrixShape.RowCount(data.Length, dimension, nameof(data));
        Data = data;
        Dimension = dimension;
    }

    /// <summary>The number of rows.</summary>
    public int Count { get; }

    /// <summary>The number of values in each row.</summary>
    public int Dimension { get; }

    /// <summary>The backing array itself (not a copy), <see cref="Count"/> × <see cref="Dimension"/> values row-major.</summary>
    public T[] Data { get; }

    /// <summary>Returns row <paramref name="index"/> as a view of the backing array.</summary>
    /// <param name="index">The row, in 0..<see cref="Count"/>-1.</param>
    /// <returns>The <see cref="Dimension"/> values of the row.</returns>
    /// <exception cref="ArgumentOutOfRangeException"><paramref name="index"/> is outside 0..<see cref="Count"/>-1.</exception>
    public ReadOnlySpan<T> Row(int index)
    {
        if ((uint)index >= (uint)Count)
        {
            DataFormatThrow.ArgumentOutOfRange(nameof(index), index, $"must be in 0..{Count - 1}");
        }

        return Data.AsSpan(index * Dimension, Dimension);
    }

    /// <summary>Returns all values as one writable span over the backing array.</summary>
    /// <returns>A span of <see cref="Count"/> × <see cref="Dimension"/> values.</returns>
    public Span<T> AsSpan() => Data;
}
