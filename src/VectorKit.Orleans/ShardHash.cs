namespace VectorKit.Orleans;

/// <summary>
/// Maps an item id to its shard: the same id gives the same shard in every process, on every machine and in every
/// version of this package, because the hash is fixed arithmetic and never <see cref="object.GetHashCode"/> (which
/// .NET randomises per process for strings, and which is free to change for other types).
/// </summary>
/// <remarks>
/// The hash is the 64-bit finaliser of the SplitMix64 generator applied to the id's two's-complement bits:
/// <c>z = id + 0x9E3779B97F4A7C15; z = (z ^ (z &gt;&gt; 30)) * 0xBF58476D1CE4E5B9; z = (z ^ (z &gt;&gt; 27)) * 0x94D049BB133111EB;
/// z ^= z &gt;&gt; 31</c> (unsigned, wrapping), and the shard is <c>z mod S</c>. Consecutive ids spread evenly; a
/// collection's shard count is fixed when it is created, since changing S would move almost every id.
/// </remarks>
public static class ShardHash
{
    /// <summary>The 64-bit hash of an id (SplitMix64 finaliser).</summary>
    /// <param name="id">The item id.</param>
    /// <returns>The hash.</returns>
    public static ulong Hash(long id)
    {
        ulong z = unchecked((ulong)id + 0x9E3779B97F4A7C15UL);
        z = unchecked((z ^ (z >> 30)) * 0xBF58476D1CE4E5B9UL);
        z = unchecked((z ^ (z >> 27)) * 0x94D049BB133111EBUL);
        return z ^ (z >> 31);
    }

    /// <summary>The shard that owns an id.</summary>
    /// <param name="id">The item id.</param>
    /// <param name="shardCount">The collection's shard count, S.</param>
    /// <returns>A shard number in [0, <paramref name="shardCount"/>).</returns>
    /// <exception cref="ArgumentOutOfRangeException"><paramref name="shardCount"/> is not positive.</exception>
    public static int ShardOf(long id, int shardCount)
    {
        ArgumentOutOfRangeException.ThrowIfNegativeOrZero(shardCount);
        return (int)(Hash(id) % (ulong)shardCount);
    }
}
