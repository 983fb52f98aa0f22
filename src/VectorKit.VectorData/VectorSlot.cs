using Microsoft.Extensions.VectorData;
using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Indexes.Graph;
using VectorKit.Indexes.InvertedFile;

namespace VectorKit.VectorData;

/// <summary>
/// One vector property's index: the VectorKit index kind and metric its index kind and distance function name, and
/// the mapping of VectorKit's distances to the abstraction's scores. Not thread-safe for writes: the collection's
/// lock guards it (reads share the lock; the index itself allows concurrent searches).
/// </summary>
internal sealed class VectorSlot : IDisposable
{
    internal const string SupportedIndexKinds =
        "Flat, Hnsw, IvfFlat, QuantizedFlat, Dynamic, " + VectorKitIndexKind.InvertedFileScalar8Bit + ", " + VectorKitIndexKind.InvertedFileProductCodes;

    internal const string SupportedDistanceFunctions =
        "CosineSimilarity, CosineDistance, DotProductSimilarity, NegativeDotProductSimilarity, EuclideanDistance, EuclideanSquaredDistance";

    /// <summary>Candidates re-scored on full vectors under compressed codes (common practice: a few times the usual top).</summary>
    private const int RescoreDepth = 100;

    private readonly int _trainingThreshold;
    private IVectorIndex _index;

    public VectorSlot(string storageName, int dimension, string indexKind, string distanceFunction, int trainingThreshold)
    {
        StorageName = storageName;
        Dimension = dimension;
        IndexKind = indexKind;
        DistanceFunction = distanceFunction;
        Metric = MetricOf(storageName, distanceFunction);
        _trainingThreshold = trainingThreshold;
        Deferred = IsDeferred(storageName, indexKind);
        _index = Deferred ? new ExactIndex(dimension, Metric) : CreateTarget(dimension, 0);
    }

    /// <summary>Rebuilds a slot around a loaded index.</summary>
    public VectorSlot(string storageName, int dimension, string indexKind, string distanceFunction, int trainingThreshold, IVectorIndex index, bool switched)
        : this(storageName, dimension, indexKind, distanceFunction, trainingThreshold)
    {
        _index.Dispose();
        _index = index;
        Switched = switched;
        if (index.Dimension != dimension || index.Metric != Metric)
        {
            throw new CollectionFileException($"the index of vector property '{storageName}' has dimension {index.Dimension} and metric {index.Metric}, the schema says {dimension} and {Metric}");
        }
    }

    public string StorageName { get; }

    public int Dimension { get; }

    public string IndexKind { get; }

    public string DistanceFunction { get; }

    public DistanceMetric Metric { get; }

    /// <summary>Whether the target index waits for <see cref="VectorKitStoreOptions.TrainingThreshold"/> vectors (an exact index answers until then).</summary>
    public bool Deferred { get; }

    /// <summary>Whether a deferred slot has moved to its target index.</summary>
    public bool Switched { get; private set; }

    public IVectorIndex Index => _index;

    /// <summary>Whether a larger score means more similar under this slot's distance function.</summary>
    public bool HigherIsBetter => DistanceFunction is Microsoft.Extensions.VectorData.DistanceFunction.CosineSimilarity
        or Microsoft.Extensions.VectorData.DistanceFunction.DotProductSimilarity;

    /// <summary>The abstraction's index kind name, the default (Flat) for null.</summary>
    public static string ResolveIndexKind(string storageName, string? indexKind)
    {
        string kind = indexKind ?? Microsoft.Extensions.VectorData.IndexKind.Flat;
        _ = IsDeferred(storageName, kind);
        return kind;
    }

    /// <summary>The abstraction's distance function name, the default (CosineSimilarity) for null.</summary>
    public static string ResolveDistanceFunction(string storageName, string? distanceFunction)
    {
        string function = distanceFunction ?? Microsoft.Extensions.VectorData.DistanceFunction.CosineSimilarity;
        _ = MetricOf(storageName, function);
        return function;
    }

    private static DistanceMetric MetricOf(string storageName, string distanceFunction) => distanceFunction switch
    {
        Microsoft.Extensions.VectorData.DistanceFunction.CosineSimilarity or Microsoft.Extensions.VectorData.DistanceFunction.CosineDistance => DistanceMetric.Cosine,
        Microsoft.Extensions.VectorData.DistanceFunction.DotProductSimilarity or Microsoft.Extensions.VectorData.DistanceFunction.NegativeDotProductSimilarity => DistanceMetric.InnerProduct,
        Microsoft.Extensions.VectorData.DistanceFunction.EuclideanDistance or Microsoft.Extensions.VectorData.DistanceFunction.EuclideanSquaredDistance => DistanceMetric.SquaredEuclidean,
        _ => throw new NotSupportedException(
            $"Vector property '{storageName}': distance function '{distanceFunction}' is not supported by VectorKit; supported: {SupportedDistanceFunctions}."),
    };

    private static bool IsDeferred(string storageName, string indexKind) => indexKind switch
    {
        Microsoft.Extensions.VectorData.IndexKind.Flat or Microsoft.Extensions.VectorData.IndexKind.Hnsw => false,
        Microsoft.Extensions.VectorData.IndexKind.IvfFlat or Microsoft.Extensions.VectorData.IndexKind.QuantizedFlat
            or Microsoft.Extensions.VectorData.IndexKind.Dynamic or VectorKitIndexKind.InvertedFileScalar8Bit
            or VectorKitIndexKind.InvertedFileProductCodes => true,
        _ => throw new NotSupportedException(
            $"Vector property '{storageName}': index kind '{indexKind}' is not supported by VectorKit; supported: {SupportedIndexKinds}."),
    };

    /// <summary>The abstraction's score for a VectorKit distance under this slot's distance function.</summary>
    public double Score(float distance) => DistanceFunction switch
    {
        Microsoft.Extensions.VectorData.DistanceFunction.CosineSimilarity => 1.0 - distance,
        Microsoft.Extensions.VectorData.DistanceFunction.DotProductSimilarity => -(double)distance,
        Microsoft.Extensions.VectorData.DistanceFunction.EuclideanDistance => Math.Sqrt(Math.Max(0.0, distance)),
        _ => distance, // CosineDistance, NegativeDotProductSimilarity and EuclideanSquaredDistance are VectorKit's own distances
    };

    /// <summary>Whether a score passes a threshold: at least it for similarities, at most it for distances.</summary>
    public bool Passes(double score, double? threshold) => threshold is not double t || (HigherIsBetter ? score >= t : score <= t);

    /// <summary>Adds or replaces vectors (all of one batch, or none of it).</summary>
    public void Upsert(long[] ids, float[] flatVectors)
    {
        if (ids.Length > 0)
        {
            _index.AddOrReplaceRange(ids, flatVectors);
        }
    }

    /// <summary>
    /// Switches a deferred slot to its target index once it holds enough vectors: the training threshold, and for
    /// product codes at least 256 (one per codeword). Called after a write is complete, so a failure here leaves the
    /// exact index, which holds every vector, in place.
    /// </summary>
    public void SwitchWhenReady()
    {
        int needed = IndexKind == VectorKitIndexKind.InvertedFileProductCodes ? Math.Max(_trainingThreshold, 256) : _trainingThreshold;
        if (Deferred && !Switched && _index.Count >= needed)
        {
            SwitchToTarget();
        }
    }

    public void Remove(IReadOnlyCollection<long> ids)
    {
        var present = new List<long>(ids.Count);
        foreach (long id in ids)
        {
            if (_index.Contains(id))
            {
                present.Add(id);
            }
        }

        if (present.Count > 0)
        {
            _index.RemoveRange(present.ToArray());
        }
    }

    /// <summary>The k nearest ids passing the filter, which runs inside the index's search.</summary>
    public SearchHit[] Search(ReadOnlySpan<float> query, int k, Func<long, bool>? filter)
    {
        if (query.Length != Dimension)
        {
            throw new ArgumentException($"The search vector has {query.Length} dimensions; vector property '{StorageName}' has {Dimension}.", "searchValue");
        }

        int capacity = Math.Min(k, _index.Count);
        if (capacity == 0)
        {
            return [];
        }

        var hits = new SearchHit[capacity];
        int found = _index.Search(query, hits, filter is null ? null : new SearchOptions { Filter = filter });
        return found == hits.Length ? hits : hits[..found];
    }

    private void SwitchToTarget()
    {
        long[] ids = _index.GetIds();
        float[] rows = new float[checked(ids.Length * Dimension)];
        for (int i = 0; i < ids.Length; i++)
        {
            _index.TryGetVector(ids[i], rows.AsSpan(i * Dimension, Dimension));
        }

        IVectorIndex target = CreateTarget(Dimension, ids.Length);
        try
        {
            if (target is VectorIndex trainable && !trainable.IsTrained)
            {
                trainable.Train(rows);
            }

            target.AddRange(ids, rows);
        }
        catch
        {
            target.Dispose();
            throw;
        }

        _index.Dispose();
        _index = target;
        Switched = true;
    }

    private IVectorIndex CreateTarget(int dimension, int count)
    {
        int lists = Math.Clamp((int)Math.Sqrt(Math.Max(count, 1)), 1, 65536);
        return IndexKind switch
        {
            Microsoft.Extensions.VectorData.IndexKind.Flat => new ExactIndex(dimension, Metric),
            Microsoft.Extensions.VectorData.IndexKind.Hnsw or Microsoft.Extensions.VectorData.IndexKind.Dynamic => new GraphIndex(dimension, Metric),
            Microsoft.Extensions.VectorData.IndexKind.QuantizedFlat => new ExactIndex(dimension, Metric, new ExactIndexOptions { Encoding = VectorEncoding.Scalar8Bit, RescoreDepth = RescoreDepth }),
            Microsoft.Extensions.VectorData.IndexKind.IvfFlat => new InvertedFileIndex(dimension, Metric, new InvertedFileOptions { ListCount = lists }),
            VectorKitIndexKind.InvertedFileScalar8Bit =>
                new InvertedFileIndex(dimension, Metric, new InvertedFileOptions { ListCount = lists, Encoding = VectorEncoding.Scalar8Bit, RescoreDepth = RescoreDepth }),
            _ => new InvertedFileIndex(dimension, Metric, new InvertedFileOptions
            {
                ListCount = lists,
                Encoding = VectorEncoding.ProductCodes,
                RescoreDepth = RescoreDepth,
                ProductCodeBytes = ProductCodeBytesFor(dimension),
            }),
        };
    }

    private static int ProductCodeBytesFor(int dimension)
    {
        foreach (int bytes in (ReadOnlySpan<int>)[64, 32, 16, 8, 4, 2])
        {
            if (dimension % bytes == 0 && bytes <= dimension)
            {
                return bytes;
            }
        }

        return 1;
    }

    public void Dispose() => _index.Dispose();
}
