namespace VectorKit.Persistence;

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

    /// <summary>Inverted file: the list centroids, <c>lists × dimension</c> float32 (empty when untrained).</summary>
    Centroids = 7,

    /// <summary>Inverted file: the entries per list, <c>lists</c> int32.</summary>
    ListLengths = 8,

    /// <summary>Inverted file: every list's codes (float32 vectors or quantizer codes, four-bit fast-scan codes one entry after another too), list after list, entries in list order.</summary>
    ListCodes = 9,

    /// <summary>Inverted file under product codes: the codewords, <c>code bytes × 256 × (dimension / code bytes)</c> float32.</summary>
    ProductCodebooks = 10,

    /// <summary>Under 8-bit scalar codes (inverted file, exact index, graph): <c>dimension</c> minimums, then <c>dimension</c> steps, float32.</summary>
    ScalarRanges = 11,

    /// <summary>Exact index or graph under 8-bit scalar codes: one code per row (graph: per slot), in order, each <c>dimension</c> rounded up to 16 bytes (padding zero).</summary>
    ScalarCodes = 12,

    /// <summary>Inverted file under rotated product codes: the rotation, <c>dimension × dimension</c> float32, row-major (empty when untrained).</summary>
    ProductRotation = 13,

    /// <summary>
    /// Exact index (format version 3), inverted file (4) and graph (5, live slots only): the rows' numbers, one int32 each,
    /// ordered by ascending id, so that a mapped file looks an id up by binary search. Derived data; a loader that hashes
    /// the ids reads it through its checksum only.
    /// </summary>
    IdOrder = 14,

    /// <summary>
    /// Inverted file under the four-bit fast-scan product-code layout: the codewords, <c>2 × code bytes</c> sub-spaces ×
    /// 16 × <c>(dimension / (2 × code bytes))</c> float32 (empty when untrained). It takes the place of
    /// <see cref="ProductCodebooks"/>, and is not skippable: a reader that does not know the layout must not read the codes.
    /// </summary>
    FourBitCodebooks = 15,

    /// <summary>
    /// Inverted file under the four-bit fast-scan layout (format version 4): every list's codes as the search reads them,
    /// list after list, each list in whole blocks of 32 entries (<c>code bytes × 32</c> bytes a block, byte <c>i</c> of
    /// entry <c>e</c> at <c>i × 32 + e</c>; unused slots of a last block zero). It takes the place of
    /// <see cref="ListCodes"/>, so a mapped file is scanned in place.
    /// </summary>
    FastScanBlocks = 16,

    /// <summary>
    /// Graph (format version 6): where each slot's upper-layer blocks start in <see cref="UpperLinks"/>, one int32 per
    /// slot in slot order, counted in ints: the total of <c>level × (links per node + 1)</c> over the slots before it. A
    /// slot of level 0 holds that running total too (where the next blocks start), so the column never decreases.
    /// Derived from the levels, so that a mapped file opens without a pass over them; a loader checks it against the
    /// levels, a mapped opener range-checks every use (and with verification checks the whole column).
    /// </summary>
    UpperLinkStarts = 17,
}
