using Orleans.Concurrency;

namespace VectorKit.Orleans;

/// <summary>
/// One copy of one shard; the key is <c>"&lt;collection&gt;/&lt;shard&gt;/&lt;copy&gt;"</c> (<see cref="ShardKey"/>). Copy 0,
/// the primary, takes the writes: it applies a write, appends it to the shard's write-ahead log, forwards it to the
/// other copies and only then acknowledges. Every copy answers searches.
/// </summary>
public interface IShardGrain : IGrainWithStringKey
{
    /// <summary>Adds or replaces items (primary only); all or nothing.</summary>
    /// <param name="ids">Distinct ids, all owned by this shard.</param>
    /// <param name="vectors">The vectors, row by row.</param>
    /// <param name="cancellationToken">Cancels before the write is logged.</param>
    /// <returns>The acknowledgement; the write is durable.</returns>
    Task<ShardWriteAck> UpsertAsync(long[] ids, float[] vectors, CancellationToken cancellationToken = default);

    /// <summary>Removes items (primary only); ids not present are ignored.</summary>
    /// <param name="ids">Distinct ids, all owned by this shard.</param>
    /// <param name="cancellationToken">Cancels before the write is logged.</param>
    /// <returns>The acknowledgement; the removal is durable.</returns>
    Task<ShardWriteAck> RemoveAsync(long[] ids, CancellationToken cancellationToken = default);

    /// <summary>Applies a logged write forwarded by the primary (replicas); catches up from the log on a gap.</summary>
    /// <param name="record">The write.</param>
    /// <returns>Whether this copy now holds the write.</returns>
    Task<bool> ApplyAsync(WriteRecord record);

    /// <summary>Searches this copy.</summary>
    /// <param name="query">The queries.</param>
    /// <param name="cancellationToken">Cancels the search.</param>
    /// <returns>Per query, this shard's top k.</returns>
    [ReadOnly]
    Task<ShardHits> SearchAsync(ShardQuery query, CancellationToken cancellationToken = default);

    /// <summary>Reads an item's stored vector.</summary>
    /// <param name="id">The id.</param>
    /// <returns>The vector, or <see langword="null"/> when absent.</returns>
    [ReadOnly]
    Task<float[]?> GetVectorAsync(long id);

    /// <summary>Every id this copy holds.</summary>
    /// <returns>The ids.</returns>
    [ReadOnly]
    Task<long[]> GetIdsAsync();

    /// <summary>This copy's state.</summary>
    /// <returns>The status.</returns>
    [ReadOnly]
    Task<ShardStatus> GetStatusAsync();

    /// <summary>Drops this copy's in-memory state; the next call re-activates it from the store (after a repair of its files).</summary>
    /// <returns>A task that completes when deactivation is scheduled.</returns>
    Task ResetAsync();
}
