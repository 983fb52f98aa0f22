using Microsoft.Extensions.VectorData;

namespace VectorKit.VectorData.Tests;

/// <summary>A rental item with every kind of property the filter tests touch.</summary>
public sealed class GearItem
{
    [VectorStoreKey]
    public int Id { get; set; }

    [VectorStoreData(IsIndexed = true)]
    public string Category { get; set; } = "";

    [VectorStoreData(IsIndexed = true)]
    public int Count { get; set; }

    [VectorStoreData(IsIndexed = true)]
    public double Price { get; set; }

    [VectorStoreData(IsIndexed = true)]
    public float Weight { get; set; }

    [VectorStoreData(IsIndexed = true)]
    public bool InStock { get; set; }

    [VectorStoreData(IsIndexed = true)]
    public int? Rating { get; set; }

    [VectorStoreData(IsIndexed = true)]
    public string[] Tags { get; set; } = [];

    [VectorStoreData(IsIndexed = true)]
    public List<string> Seasons { get; set; } = [];

    [VectorStoreData(IsFullTextIndexed = true)]
    public string Description { get; set; } = "";

    [VectorStoreVector(4, DistanceFunction = DistanceFunction.EuclideanSquaredDistance, IndexKind = IndexKind.Flat)]
    public ReadOnlyMemory<float>? Embedding { get; set; }
}

/// <summary>A record keyed by string, whose vector is generated from its text.</summary>
public sealed class NoteRecord
{
    [VectorStoreKey]
    public string Key { get; set; } = "";

    [VectorStoreData(IsFullTextIndexed = true)]
    public string Text { get; set; } = "";

    [VectorStoreVector(8)]
    public string? TextEmbedding { get; set; }
}

/// <summary>A record keyed by Guid with a float[] cosine vector.</summary>
public sealed class GuidRecord
{
    [VectorStoreKey]
    public Guid Key { get; set; }

    [VectorStoreData]
    public string Name { get; set; } = "";

    [VectorStoreVector(3, DistanceFunction = DistanceFunction.CosineSimilarity)]
    public float[]? Vector { get; set; }
}

/// <summary>A record keyed by long with an inner-product vector.</summary>
public sealed class LongRecord
{
    [VectorStoreKey]
    public long Key { get; set; }

    [VectorStoreData]
    public DateTimeOffset When { get; set; }

    [VectorStoreData]
    public decimal Amount { get; set; }

    [VectorStoreVector(2, DistanceFunction = DistanceFunction.DotProductSimilarity)]
    public ReadOnlyMemory<float> Vector { get; set; }
}
