using VectorKit.Distance;
using VectorKit.Internal;

namespace VectorKit.Indexes.InvertedFile;

/// <summary>
/// The primary state of an <see cref="InvertedFileIndex"/>, as persistence saves and loads it. Entries are in list
/// order (list 0's entries front to back, then list 1's, ...); slot numbers, the per-slot list and position, and the
/// id lookup are derived from that order at load.
/// </summary>
internal sealed class InvertedFileIndexParts
{
    public required int Dimension { get; init; }

    public required DistanceMetric Metric { get; init; }

    public required InvertedFileOptions Options { get; init; }

    /// <summary>Whether the centroids (and the quantizer under compressed storage) are trained.</summary>
    public required bool Trained { get; init; }

    /// <summary>Stored vectors: the sum of <see cref="ListLengths"/>.</summary>
    public required int Count { get; init; }

    /// <summary><c>ListCount × Dimension</c> floats when trained, else empty.</summary>
    public required float[] Centroids { get; init; }

    /// <summary>Under product codes when trained: the codewords (<c>CodeBytes × 256 × Dimension / CodeBytes</c> floats); else <see langword="null"/>.</summary>
    public float[]? ProductCodewords { get; init; }

    /// <summary>Under the four-bit fast-scan layout when trained: the codewords (<c>2 × CodeBytes × 16 × Dimension / (2 × CodeBytes)</c> floats); else <see langword="null"/>.</summary>
    public float[]? FourBitCodewords { get; init; }

    /// <summary>Under product codes with a rotation when trained: the <c>Dimension × Dimension</c> rotation, row-major; else <see langword="null"/>.</summary>
    public float[]? ProductRotation { get; init; }

    /// <summary>Under 8-bit scalar codes when trained: <c>Dimension</c> minimums, then <c>Dimension</c> steps; else <see langword="null"/>.</summary>
    public float[]? ScalarRanges { get; init; }

    /// <summary>Entries per list, <c>ListCount</c> values.</summary>
    public required int[] ListLengths { get; init; }

    /// <summary>
    /// Per list its codes: one after another, at least <c>length × code bytes</c> bytes (exactly that many after a
    /// load); or, when <see cref="ListCodesPacked"/>, the fast-scan blocks, at least the list's whole blocks.
    /// </summary>
    public required byte[][] ListCodes { get; init; }

    /// <summary>On export from a mapped index, its lists read in place (<see cref="ListCodes"/> is then empty); else <see langword="null"/>.</summary>
    public MappedLists? MappedCodes { get; init; }

    /// <summary>
    /// Whether <see cref="ListCodes"/> holds fast-scan blocks (always on export under the fast-scan layout; on load from
    /// a file of format version 4) rather than codes one after another (older fast-scan files, which a load packs).
    /// </summary>
    public bool ListCodesPacked { get; init; }

    /// <summary>The codes (or fast-scan blocks) of <paramref name="list"/>, from <see cref="ListCodes"/> or the mapped lists.</summary>
    public ReadOnlySpan<byte> CodesOf(int list) => MappedCodes is { } mapped ? mapped.Codes(list) : ListCodes[list];

    /// <summary><see cref="VectorIndex.Count"/> ids in list order.</summary>
    public required long[] Ids { get; init; }

    /// <summary>The full vectors when kept (unit length under cosine), else <see langword="null"/>.</summary>
    public VectorBuffer? FullVectors { get; init; }

    /// <summary>
    /// On export, the row of <see cref="FullVectors"/> holding each entry in list order (the buffer is in slot
    /// order); <see langword="null"/> after a load, where the rows are already in list order.
    /// </summary>
    public int[]? FullRowOrder { get; init; }
}
