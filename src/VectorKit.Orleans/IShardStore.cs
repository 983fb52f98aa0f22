using VectorKit.Indexes;

namespace VectorKit.Orleans;

/// <summary>
/// Durable storage shared by every silo of a cluster: collection definitions, one snapshot (a saved index file) per
/// shard and one write-ahead log per shard. Shards re-activate from it on any silo, so every silo must see the same
/// store (a shared directory, or an implementation over blob storage).
/// </summary>
/// <remarks>
/// <para><b>Contract.</b> <see cref="AppendLogAsync"/> returns only when the bytes would survive a crash of the calling
/// process and machine (flushed to stable storage); a write is acknowledged to callers only after it. Snapshots are
/// replaced atomically: a reader sees the old one or the new one, never a mix; a snapshot that fails its checksum
/// surfaces as an <see cref="VectorKit.Persistence.IndexFileException"/>.</para>
/// <para><b>Thread safety.</b> Implementations are called concurrently for different shards, and for one shard by its
/// primary (the only writer) and by its replicas (readers).</para>
/// </remarks>
public interface IShardStore
{
    /// <summary>Records a collection's definition, or checks that the recorded one is equal.</summary>
    /// <param name="definition">The definition (already validated).</param>
    /// <param name="cancellationToken">Cancels the call.</param>
    /// <returns><see langword="true"/> when it was created now; <see langword="false"/> when an equal one existed.</returns>
    /// <exception cref="InvalidOperationException">A different definition exists under the same name.</exception>
    Task<bool> CreateCollectionAsync(ShardedCollectionDefinition definition, CancellationToken cancellationToken = default);

    /// <summary>Reads a collection's definition.</summary>
    /// <param name="name">The collection name.</param>
    /// <param name="cancellationToken">Cancels the call.</param>
    /// <returns>The definition, or <see langword="null"/> when there is no such collection.</returns>
    Task<ShardedCollectionDefinition?> LoadCollectionAsync(string name, CancellationToken cancellationToken = default);

    /// <summary>Loads a shard's latest snapshot.</summary>
    /// <param name="collection">The collection name.</param>
    /// <param name="shard">The shard number.</param>
    /// <param name="cancellationToken">Cancels the call.</param>
    /// <returns>The index and the log sequence number it contains every write up to, or <see langword="null"/> when none was saved.</returns>
    /// <exception cref="VectorKit.Persistence.IndexFileException">The snapshot is damaged (checksum, layout).</exception>
    Task<(IVectorIndex Index, long Sequence)?> LoadSnapshotAsync(string collection, int shard, CancellationToken cancellationToken = default);

    /// <summary>Saves a shard's snapshot atomically, replacing the previous one.</summary>
    /// <param name="collection">The collection name.</param>
    /// <param name="shard">The shard number.</param>
    /// <param name="index">The index; not written to during the call.</param>
    /// <param name="sequence">The last log sequence number the index contains.</param>
    /// <param name="cancellationToken">Cancels the call (the previous snapshot then stays).</param>
    /// <returns>A task that completes when the snapshot is durable.</returns>
    Task SaveSnapshotAsync(string collection, int shard, IVectorIndex index, long sequence, CancellationToken cancellationToken = default);

    /// <summary>Appends encoded records to a shard's log and flushes them to stable storage.</summary>
    /// <param name="collection">The collection name.</param>
    /// <param name="shard">The shard number.</param>
    /// <param name="records">The bytes to append.</param>
    /// <param name="cancellationToken">Cancels the call before the write starts.</param>
    /// <returns>A task that completes when the bytes are durable.</returns>
    Task AppendLogAsync(string collection, int shard, ReadOnlyMemory<byte> records, CancellationToken cancellationToken = default);

    /// <summary>Reads a shard's whole log (empty when there is none).</summary>
    /// <param name="collection">The collection name.</param>
    /// <param name="shard">The shard number.</param>
    /// <param name="cancellationToken">Cancels the call.</param>
    /// <returns>The log's bytes.</returns>
    Task<byte[]> ReadLogAsync(string collection, int shard, CancellationToken cancellationToken = default);

    /// <summary>Replaces a shard's log atomically (after a snapshot, or to cut a torn tail).</summary>
    /// <param name="collection">The collection name.</param>
    /// <param name="shard">The shard number.</param>
    /// <param name="records">The new contents.</param>
    /// <param name="cancellationToken">Cancels the call (the old log then stays).</param>
    /// <returns>A task that completes when the new log is durable.</returns>
    Task ReplaceLogAsync(string collection, int shard, ReadOnlyMemory<byte> records, CancellationToken cancellationToken = default);
}
