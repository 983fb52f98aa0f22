using Microsoft.Extensions.VectorData;

namespace RentalSearch;

/// <summary>One item the co-op rents out. The description is both full-text indexed and embedded.</summary>
public sealed class RentalItem
{
    [VectorStoreKey]
    public int Id { get; set; }

    [VectorStoreData(IsIndexed = true)]
    public string Category { get; set; } = "";

    [VectorStoreData(IsIndexed = true)]
    public string ModelCode { get; set; } = "";

    [VectorStoreData(IsIndexed = true)]
    public double DailyRate { get; set; }

    [VectorStoreData(IsIndexed = true)]
    public bool InStock { get; set; }

    [VectorStoreData(IsIndexed = true)]
    public string[] Tags { get; set; } = [];

    [VectorStoreData(IsFullTextIndexed = true)]
    public string Description { get; set; } = "";

    /// <summary>The description again, as the input the store embeds with the collection's generator.</summary>
    [VectorStoreVector(MiniLmEmbeddingGenerator.Dimension, DistanceFunction = DistanceFunction.CosineSimilarity, IndexKind = IndexKind.Flat)]
    public string? Embedding { get; set; }
}
