using VectorKit.Internal;

namespace VectorKit.Indexes;

/// <summary>Helpers over the id → slot lookup the indexes keep.</summary>
internal static class IdLookup
{
    /// <summary>Copies the row of <paramref name="id"/> into <paramref name="destination"/>; false when the id is absent.</summary>
    public static bool TryCopyRow(IdMap slotOf, VectorBuffer vectors, long id, Span<float> destination)
    {
        if (!slotOf.TryGetValue(id, out int slot))
        {
            return false;
        }

        vectors.RowSpan(slot).CopyTo(destination);
        return true;
    }
}
