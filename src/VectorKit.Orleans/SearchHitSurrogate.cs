using VectorKit.Indexes;

namespace VectorKit.Orleans;

/// <summary>The wire form of VectorKit's <see cref="SearchHit"/>, so hits travel between grains and clients as they are.</summary>
[GenerateSerializer]
public struct SearchHitSurrogate
{
    /// <summary>The item id.</summary>
    [Id(0)]
    public long Id;

    /// <summary>The distance (smaller is better).</summary>
    [Id(1)]
    public float Distance;
}

/// <summary>Converts <see cref="SearchHit"/> to and from <see cref="SearchHitSurrogate"/> for the Orleans serializer.</summary>
[RegisterConverter]
public sealed class SearchHitConverter : IConverter<SearchHit, SearchHitSurrogate>
{
    /// <inheritdoc />
    public SearchHit ConvertFromSurrogate(in SearchHitSurrogate surrogate) => new(surrogate.Id, surrogate.Distance);

    /// <inheritdoc />
    public SearchHitSurrogate ConvertToSurrogate(in SearchHit value) => new() { Id = value.Id, Distance = value.Distance };
}
