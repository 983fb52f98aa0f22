using VectorKit.Internal;
namespace VectorKit.Indexes;

/// <summary>Helpers over the id → slot lookup the indexes keep.</summary>
internal static class IdLookup
{
    /// <summary>The ids of the lookup in ascending order, as a new array (what <see cref="IVectorIndex.GetIds"/> returns).</summary>
    public static long[] SortedIds(Dictionary<long, int> slotOf)
    {
        long[] ids = new long[slotOf.Count];
        slotOf.Keys.CopyTo(ids, 0);
        Array.Sort(ids);
        return ids;
    }

    /// <summary>Copies the row of <paramref name="id"/> into <paramref name="destination"/>; false when the id is absent.</summary>
    public static bool TryCopyRow(Dictionary<long, int> slotOf, VectorBuffer vectors, long id, Span<float> destination)
    {
        if (!slotOf.TryGetValue(id, out int slot))
        {
            return false;
        }

        vectors.RowSpan(slot).CopyTo(destination);
        return true;
    }
}
