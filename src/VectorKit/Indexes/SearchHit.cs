using System.Runtime.InteropServices;

namespace VectorKit.Indexes;

/// <summary>One search result: the id of a stored vector and its distance to the query.</summary>
/// <remarks>
/// Distances follow the convention of <see cref="Distance.DistanceMetric"/>: smaller is better for every metric.
/// Results are ordered by <see cref="CompareTo"/>: ascending distance, then ascending id, so equal distances
/// never make an order depend on storage layout or thread timing. The struct is 12 bytes.
/// </remarks>
/// <param name="Id">The caller-supplied id of the stored vector.</param>
/// <param name="Distance">The distance from the query, smaller is better.</param>
[StructLayout(LayoutKind.Sequential, Pack = 4)]
public readonly record struct SearchHit(long Id, float Distance) : IComparable<SearchHit>
{
    /// <summary>Orders by ascending <see cref="Distance"/>, then ascending <see cref="Id"/>.</summary>
    /// <param name="other">The hit to compare with.</param>
    /// <returns>Negative when this hit ranks first, positive when <paramref name="other"/> does, zero when equal.</returns>
    public int CompareTo(SearchHit other)
    {
        int byDistance = Distance.CompareTo(other.Distance);
        return byDistance != 0 ? byDistance : Id.CompareTo(other.Id);
    }

    // True when the left (distance, id) pair ranks strictly before the right one.
    internal static bool RanksBefore(float leftDistance, long leftId, float rightDistance, long rightId)
        => leftDistance < rightDistance || (leftDistance == rightDistance && leftId < rightId);
}
