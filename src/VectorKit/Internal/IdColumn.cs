namespace VectorKit.Internal;

/// <summary>
/// One id per row in one contiguous, 64-byte-aligned native block (see <see cref="RowBuffer{T}"/>): the exact index's
/// and the graph's slot → id table, which a mapped file's <c>Ids</c> section can back in place.
/// </summary>
internal sealed class IdColumn(int initialCapacity) : Column<long>(initialCapacity);
