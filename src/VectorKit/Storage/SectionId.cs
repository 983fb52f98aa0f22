namespace VectorKit.Storage;

/// <summary>
/// Identifies a bulk section in an index file. One numbering for every index kind: a new kind or a new section takes
/// the next free number, and a retired number is never given to anything else (files of old versions keep it).
/// </summary>
internal enum SectionId : uint
{
    /// <summary>One 64-bit id per stored row (per slot for a graph, removed slots included).</summary>
    Ids = 1,

    /// <summary>The rows, <c>rows × dimension</c> float32 values, already unit length under cosine.</summary>
    Vectors = 2,

    /// <summary>Graph: one byte per slot, the node's top layer.</summary>
    NodeLevels = 3,

    /// <summary>Graph: one byte per slot, 1 when the slot's item was removed, else 0.</summary>
    RemovedFlags = 4,

    /// <summary>Graph: the bottom layer's link blocks, <c>slots × (bottom limit + 1)</c> int32 (count, then neighbours).</summary>
    BottomLinks = 5,

    /// <summary>Graph: the upper layers' link blocks of every node with a level ≥ 1, in slot order, layer 1 first.</summary>
    UpperLinks = 6,
}
