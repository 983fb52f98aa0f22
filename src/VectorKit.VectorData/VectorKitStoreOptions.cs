using Microsoft.Extensions.AI;
using VectorKit.Persistence;

namespace VectorKit.VectorData;

/// <summary>Options for a <see cref="VectorKitStore"/>.</summary>
/// <remarks>Instances are immutable once built and may be shared.</remarks>
public sealed class VectorKitStoreOptions
{
    private readonly int _trainingThreshold = 1024;
    private readonly double _bm25K1 = 1.2;
    private readonly double _bm25B = 0.75;
    private readonly int _fusionRankConstant = 60;
    private readonly int _fusionDepth = 100;

    /// <summary>The defaults: memory only, no embedding generator, the untrusted-file load limits.</summary>
    public static VectorKitStoreOptions Default { get; } = new();

    /// <summary>
    /// The store directory: each collection is saved there as one file, <c>&lt;name&gt;.vkcollection</c>, holding its
    /// index, records and key map together. <see langword="null"/> (the default) keeps collections in memory only.
    /// Collections found in the directory are listed and loaded on first use; nothing is written until
    /// <see cref="VectorKitStore.SaveAsync"/> or <see cref="VectorKitCollection{TKey, TRecord}.SaveAsync"/>.
    /// </summary>
    public string? Directory { get; init; }

    /// <summary>The embedding generator for vector properties that name none themselves and whose collection names none.</summary>
    public IEmbeddingGenerator? EmbeddingGenerator { get; init; }

    /// <summary>
    /// Limits applied when a collection file is loaded: the index through the core library's
    /// <see cref="IndexLoadOptions"/>, the records through <see cref="MaxRecords"/> and <see cref="MaxStringBytes"/>.
    /// Default <see cref="IndexLoadOptions.Untrusted"/>.
    /// </summary>
    public IndexLoadOptions IndexLoadOptions { get; init; } = IndexLoadOptions.Untrusted;

    /// <summary>The most records a loaded collection file may declare. Default 10,000,000 (the untrusted index preset's count).</summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is negative.</exception>
    public int MaxRecords
    {
        get;
        init => field = value >= 0 ? value : throw new ArgumentOutOfRangeException(nameof(MaxRecords), value, "must be 0 or more");
    } = 10_000_000;

    /// <summary>The longest string, in UTF-8 bytes, a loaded collection file may hold. Default 16 MiB.</summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is negative.</exception>
    public int MaxStringBytes
    {
        get;
        init => field = value >= 0 ? value : throw new ArgumentOutOfRangeException(nameof(MaxStringBytes), value, "must be 0 or more");
    } = 16 << 20;

    /// <summary>
    /// For index kinds that learn from data (<c>IvfFlat</c>, <c>QuantizedFlat</c>, the inverted-file variants) and for
    /// <c>Dynamic</c>: the number of vectors a collection holds before the target index is trained on all of them and
    /// takes over. Until then an exact index answers (exactly). Default 1,024; at least 1.
    /// </summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is less than 1.</exception>
    public int TrainingThreshold
    {
        get => _trainingThreshold;
        init => _trainingThreshold = value >= 1 ? value : throw new ArgumentOutOfRangeException(nameof(TrainingThreshold), value, "must be at least 1");
    }

    /// <summary>BM25's term-frequency saturation k1 for hybrid search. Default 1.2 (common practice); 0 or more.</summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is negative or not finite.</exception>
    public double Bm25K1
    {
        get => _bm25K1;
        init => _bm25K1 = double.IsFinite(value) && value >= 0 ? value : throw new ArgumentOutOfRangeException(nameof(Bm25K1), value, "must be finite and 0 or more");
    }

    /// <summary>BM25's length normalisation b for hybrid search. Default 0.75 (common practice); in [0, 1].</summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is outside [0, 1].</exception>
    public double Bm25B
    {
        get => _bm25B;
        init => _bm25B = value is >= 0 and <= 1 ? value : throw new ArgumentOutOfRangeException(nameof(Bm25B), value, "must be in [0, 1]");
    }

    /// <summary>
    /// The constant k of reciprocal rank fusion: a result at one-based rank r in a list adds 1 / (k + r) to its fused
    /// score. Default 60, the value used by Cormack, Clarke and Büttcher (2009); 0 or more.
    /// </summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is negative.</exception>
    public int FusionRankConstant
    {
        get => _fusionRankConstant;
        init => _fusionRankConstant = value >= 0 ? value : throw new ArgumentOutOfRangeException(nameof(FusionRankConstant), value, "must be 0 or more");
    }

    /// <summary>
    /// How many results of each list (vector and keyword) hybrid search fuses: the larger of this and top + skip.
    /// Default 100; at least 1.
    /// </summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is less than 1.</exception>
    public int FusionDepth
    {
        get => _fusionDepth;
        init => _fusionDepth = value >= 1 ? value : throw new ArgumentOutOfRangeException(nameof(FusionDepth), value, "must be at least 1");
    }
}
