using VectorKit.Distance;
using VectorKit.Internal;

namespace VectorKit.Indexes.Graph;

/// <summary>
/// The primary state of a <see cref="GraphIndex"/>, as persistence saves and loads it: everything else (id lookup,
/// bookkeeping) is derived from it. Slots are storage positions; removed slots are included and flagged.
/// </summary>
internal sealed class GraphIndexParts
{
    public required int Dimension { get; init; }

    public required DistanceMetric Metric { get; init; }

    /// <summary>The options; <see cref="GraphIndexOptions.InitialCapacity"/> is not part of the state.</summary>
    public required GraphIndexOptions Options { get; init; }

    /// <summary>Stored slots, live and removed.</summary>
    public required int Slots { get; init; }

    /// <summary>Live items.</summary>
    public required int Count { get; init; }

    /// <summary>At least <see cref="Slots"/> ids.</summary>
    public required ReadOnlyMemory<long> Ids { get; init; }

    /// <summary>At least <see cref="Slots"/> flags: 1 for a removed slot, else 0.</summary>
    public required ReadOnlyMemory<byte> Removed { get; init; }

    /// <summary>Exactly <see cref="Slots"/> levels.</summary>
    public required ReadOnlyMemory<byte> Levels { get; init; }

    /// <summary><c>Slots × (bottom limit + 1)</c> ints: per slot the count, then the neighbour slots.</summary>
    public required ReadOnlyMemory<int> BottomLinks { get; init; }

    /// <summary>For each slot with level ≥ 1, in slot order, <c>level × (upper limit + 1)</c> ints, layer 1 first.</summary>
    public required ReadOnlyMemory<int> UpperLinks { get; init; }

    /// <summary>
    /// At least <see cref="Slots"/> rows, unit length under cosine: the storage under float32, the full vectors under
    /// 8-bit codes with a positive re-score depth, else <see langword="null"/>.
    /// </summary>
    public required VectorBuffer? Vectors { get; init; }

    /// <summary>Under 8-bit storage, at least <see cref="Slots"/> codes; else <see langword="null"/>.</summary>
    public CodeBuffer? Codes { get; init; }

    /// <summary>Under 8-bit storage once trained: <c>dimension</c> minimums, then <c>dimension</c> steps; else <see langword="null"/>.</summary>
    public float[]? ScalarRanges { get; init; }

    /// <summary>The entry point's slot; -1 when there are no live items.</summary>
    public required int EntrySlot { get; init; }

    /// <summary>The entry point's level, the graph's top layer; 0 when empty.</summary>
    public required int EntryLevel { get; init; }

    /// <summary>The most levels a node may have (the index's own cap).</summary>
    public static int MaxNodeLevel => GraphIndex.MaxNodeLevel;
}
