namespace VectorKit.Indexes;

/// <summary>Convenience overloads for <see cref="IVectorIndex"/>.</summary>
public static class VectorIndexExtensions
{
    /// <summary>Finds the <paramref name="k"/> stored vectors nearest to <paramref name="query"/>, best first.</summary>
    /// <param name="index">The index to search.</param>
    /// <param name="query">Exactly <see cref="IVectorIndex.Dimension"/> finite components.</param>
    /// <param name="k">Results wanted; more than the index holds returns everything.</param>
    /// <param name="options">Filter and search width; <see langword="null"/> for defaults.</param>
    /// <returns>A new array of at most <paramref name="k"/> hits.</returns>
    /// <exception cref="ArgumentNullException"><paramref name="index"/> is null.</exception>
    /// <exception cref="ArgumentOutOfRangeException"><paramref name="k"/> is not positive.</exception>
    /// <exception cref="ArgumentException">The query is invalid (see <see cref="IVectorIndex.Search"/>).</exception>
    public static SearchHit[] Search(this IVectorIndex index, ReadOnlySpan<float> query, int k, SearchOptions? options = null)
    {
        ArgumentNullException.ThrowIfNull(index);
        if (k <= 0)
        {
            ThrowHelper.ThrowArgumentOutOfRange(nameof(k), k, "must be positive");
        }

        // Never allocate more than the index could return: k may be int.MaxValue meaning "everything".
        var buffer = new SearchHit[Math.Max(1, Math.Min(k, index.Count))];
        int written = index.Search(query, buffer, options);
        return written == buffer.Length ? buffer : buffer.AsSpan(0, written).ToArray();
    }
}
