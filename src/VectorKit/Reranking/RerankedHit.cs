using System.Runtime.InteropServices;

namespace VectorKit.Reranking;

/// <summary>One re-ranked result: the item, its pairwise score, and where retrieval had placed it.</summary>
/// <param name="Id">The item's id.</param>
/// <param name="Score">The pairwise scorer's score; higher is better. Results are ordered by it, ties by ascending id.</param>
/// <param name="RetrievalDistance">The index's distance from the retrieval vector (smaller is better, see <see cref="Distance.DistanceMetric"/>).</param>
/// <param name="RetrievalRank">The item's position in the retrieval results, 0 for the nearest.</param>
/// <param name="ExactDistance">The distance on full vectors when the exact re-scoring stage ran; <see cref="float.NaN"/> when it did not.</param>
[StructLayout(LayoutKind.Sequential, Pack = 4)]
public readonly record struct RerankedHit(long Id, float Score, float RetrievalDistance, int RetrievalRank, float ExactDistance)
{
    // True when the left (score, id) pair ranks strictly before the right one: higher score, then lower id.
    internal static bool RanksBefore(float leftScore, long leftId, float rightScore, long rightId)
        => leftScore > rightScore || (leftScore == rightScore && leftId < rightId);
}
