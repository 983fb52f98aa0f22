using System.Diagnostics;
using System.Runtime.CompilerServices;

namespace VectorKit.Indexes;

/// <summary>
/// A bounded max-heap of the best <c>k</c> hits seen so far: the worst kept hit sits at the root, so each candidate
/// costs one comparison unless it enters. O(n log k) over n candidates, no full sort.
/// </summary>
/// <remarks>Ordering is <see cref="SearchHit.CompareTo"/>: distance, then id, so ties resolve the same way every time.</remarks>
internal static class TopK
{
    /// <summary>Offers a candidate to the heap held in <paramref name="heap"/>[0..<paramref name="count"/>).</summary>
    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static void Offer(Span<SearchHit> heap, ref int count, float distance, long id)
    {
        if (count < heap.Length)
        {
            heap[count] = new SearchHit(id, distance);
            SiftUp(heap, count);
            count++;
        }
        else if (SearchHit.RanksBefore(distance, id, heap[0].Distance, heap[0].Id))
        {
            heap[0] = new SearchHit(id, distance);
            SiftDown(heap, count);
        }
    }

    /// <summary>The distance a candidate must beat (or tie with a smaller id) to enter; +∞ until the heap is full.</summary>
    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static float Bound(ReadOnlySpan<SearchHit> heap, int count) => count < heap.Length ? float.PositiveInfinity : heap[0].Distance;

    /// <summary>Sorts the heap's content best first, in place; returns the count.</summary>
    public static int SortBestFirst(Span<SearchHit> heap, int count)
    {
        heap[..count].Sort();
        return count;
    }

    private static void SiftUp(Span<SearchHit> heap, int index)
    {
        SearchHit item = heap[index];
        while (index > 0)
        {
            int parent = (index - 1) >> 1;
            if (!Worse(item, heap[parent]))
            {
                break;
            }

            heap[index] = heap[parent];
            index = parent;
        }

        heap[index] = item;
    }

    private static void SiftDown(Span<SearchHit> heap, int count)
    {
        Debug.Assert(count > 0);
        SearchHit item = heap[0];
        int index = 0;
        while (true)
        {
            int child = (2 * index) + 1;
            if (child >= count)
            {
                break;
            }

            if (child + 1 < count && Worse(heap[child + 1], heap[child]))
            {
                child++;
            }

            if (!Worse(heap[child], item))
            {
                break;
            }

            heap[index] = heap[child];
            index = child;
        }

        heap[index] = item;
    }

    // The max-heap order: a is "worse" (nearer the root) when it ranks after b.
    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    private static bool Worse(SearchHit a, SearchHit b) => SearchHit.RanksBefore(b.Distance, b.Id, a.Distance, a.Id);
}
