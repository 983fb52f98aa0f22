namespace VectorKit.Orleans;

/// <summary>
/// A filter on item ids that travels to the shards (a delegate cannot): an item passes when it is in
/// <see cref="Only"/> (when given), not in <see cref="Except"/>, and within [<see cref="From"/>, <see cref="To"/>]
/// (each bound when given, both inclusive). With <see cref="Only"/>, the query goes only to the shards that own those ids.
/// </summary>
/// <param name="Only">The ids allowed, or <see langword="null"/> for all.</param>
/// <param name="Except">The ids excluded, or <see langword="null"/>.</param>
/// <param name="From">The smallest id allowed, or <see langword="null"/>.</param>
/// <param name="To">The largest id allowed, or <see langword="null"/>.</param>
[GenerateSerializer]
[Immutable]
public sealed record IdFilter(
    [property: Id(0)] long[]? Only = null,
    [property: Id(1)] long[]? Except = null,
    [property: Id(2)] long? From = null,
    [property: Id(3)] long? To = null)
{
    /// <summary>The most ids <see cref="Only"/> and <see cref="Except"/> may list together.</summary>
    public const int MaxListedIds = 100_000;

    /// <summary>Checks the filter.</summary>
    /// <exception cref="ArgumentException">The lists are too long together, or <see cref="From"/> exceeds <see cref="To"/>.</exception>
    public void Validate()
    {
        long listed = (long)(Only?.Length ?? 0) + (Except?.Length ?? 0);
        if (listed > MaxListedIds)
        {
            throw new ArgumentException($"An id filter lists at most {MaxListedIds} ids; it lists {listed}.", "filter");
        }

        if (From > To)
        {
            throw new ArgumentException($"The id filter's From ({From}) exceeds its To ({To}).", "filter");
        }
    }

    /// <summary>The shards an item passing this filter can live in.</summary>
    /// <param name="shardCount">The collection's shard count.</param>
    /// <returns>Every shard, or with <see cref="Only"/> just those owning its ids, ascending.</returns>
    public int[] Shards(int shardCount)
    {
        if (Only is null)
        {
            return Enumerable.Range(0, shardCount).ToArray();
        }

        var shards = new SortedSet<int>();
        foreach (long id in Only)
        {
            shards.Add(ShardHash.ShardOf(id, shardCount));
        }

        return [.. shards];
    }

    /// <summary>The filter as a predicate for an index search.</summary>
    /// <returns>The predicate; thread-safe.</returns>
    public Func<long, bool> ToPredicate()
    {
        HashSet<long>? only = Only is null ? null : [.. Only];
        HashSet<long>? except = Except is null || Except.Length == 0 ? null : [.. Except];
        long from = From ?? long.MinValue;
        long to = To ?? long.MaxValue;
        return id => id >= from && id <= to && (only is null || only.Contains(id)) && (except is null || !except.Contains(id));
    }
}
