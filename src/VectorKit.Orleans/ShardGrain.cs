using Microsoft.Extensions.Logging;
using Microsoft.Extensions.Options;
using VectorKit.Indexes;

namespace VectorKit.Orleans;

/// <summary>
/// One copy of one shard (see <see cref="IShardGrain"/>). On activation it reads the collection's definition, loads
/// the shard's snapshot (or creates an empty index), replays the write-ahead log past it and checks that every id
/// belongs to this shard; any failure leaves the copy active but unavailable, answering every call with a
/// <see cref="ShardUnavailableException"/> that names the problem.
/// </summary>
/// <remarks>
/// <b>Durability (write-ahead log).</b> The primary applies a write to its index (which validates it), appends the
/// record to the log (flushed to stable storage), forwards it to the replicas, and acknowledges. If the append
/// fails, the copy deactivates, dropping the unlogged change, and the caller gets the error. Every
/// <see cref="ShardedCollectionDefinition.SnapshotEveryWrites"/> writes, and on a graceful deactivation, the primary
/// saves a snapshot (VectorKit's atomic, checksummed index file) and empties the log.
/// </remarks>
[ShardCopyPlacement]
internal sealed class ShardGrain : Grain, IShardGrain
{
    private readonly IShardStore _store;
    private readonly IEmptyShardBuilder _factory;
    private readonly VectorKitShardingOptions _options;
    private readonly ILogger<ShardGrain> _log;
    private readonly string _collection;
    private readonly int _shard;
    private readonly int _replica;
    private ShardedCollectionDefinition? _definition;
    private IVectorIndex? _index;
    private long _sequence;
    private int _writesSinceSnapshot;
    private string? _problem;
    private bool _problemIsTransient;

    public ShardGrain(IShardStore store, IEmptyShardBuilder factory, IOptions<VectorKitShardingOptions> options, ILogger<ShardGrain> log)
    {
        _store = store;
        _factory = factory;
        _options = options.Value;
        _log = log;
        if (!ShardKey.TryParse(this.GetPrimaryKeyString(), out _collection, out _shard, out _replica))
        {
            _problem = $"'{this.GetPrimaryKeyString()}' is not a shard key (collection/shard/copy).";
            _collection = "";
        }
    }

    private bool IsPrimary => _replica == 0;

    public override async Task OnActivateAsync(CancellationToken cancellationToken)
    {
        if (_problem is null)
        {
            await LoadAsync(cancellationToken);
        }

        if (_problem is not null)
        {
            _log.LogError("Shard {Collection}/{Shard} copy {Replica} unavailable: {Problem}", _collection, _shard, _replica, _problem);
        }
    }

    public override async Task OnDeactivateAsync(DeactivationReason reason, CancellationToken cancellationToken)
    {
        try
        {
            if (IsPrimary && _problem is null && _index is not null && _writesSinceSnapshot > 0 && reason.ReasonCode != DeactivationReasonCode.ApplicationError)
            {
                await SnapshotAsync(cancellationToken);
            }
        }
        catch (Exception e) when (e is IOException or OperationCanceledException or UnauthorizedAccessException)
        {
            // The log still holds every write; the next activation replays it.
            _log.LogWarning(e, "Shard {Collection}/{Shard}: snapshot on deactivation failed", _collection, _shard);
        }
        finally
        {
            _index?.Dispose();
            _index = null;
        }
    }

    public async Task<ShardWriteAck> UpsertAsync(long[] ids, float[] vectors, CancellationToken cancellationToken = default)
    {
        IVectorIndex index = CheckWritable(ids);
        ArgumentNullException.ThrowIfNull(vectors);
        if (vectors.Length != (long)ids.Length * index.Dimension)
        {
            throw new ArgumentException($"Expected {ids.Length} vectors of dimension {index.Dimension} ({(long)ids.Length * index.Dimension} floats); got {vectors.Length} floats.", nameof(vectors));
        }

        cancellationToken.ThrowIfCancellationRequested();
        int replaced = ids.Length == 0 ? 0 : index.AddOrReplaceRange(ids, vectors);
        var record = new WriteRecord(_sequence + 1, WriteKind.Upsert, ids, vectors);
        return await LogAndForwardAsync(record, replaced);
    }

    public async Task<ShardWriteAck> RemoveAsync(long[] ids, CancellationToken cancellationToken = default)
    {
        IVectorIndex index = CheckWritable(ids);
        cancellationToken.ThrowIfCancellationRequested();
        long[] present = Array.FindAll(ids, index.Contains);
        index.RemoveRange(present);
        var record = new WriteRecord(_sequence + 1, WriteKind.Remove, ids, []);
        return await LogAndForwardAsync(record, present.Length);
    }

    public async Task<bool> ApplyAsync(WriteRecord record)
    {
        ArgumentNullException.ThrowIfNull(record);
        if (_problem is not null || _index is null)
        {
            return false;
        }

        if (record.Sequence <= _sequence)
        {
            return true;
        }

        if (record.Sequence == _sequence + 1)
        {
            Apply(_index, record);
            _sequence = record.Sequence;
            return true;
        }

        // A forward was missed (a timeout, a re-activation in between): the log has everything; reload from it.
        await ReloadAsync();
        return _problem is null && _sequence >= record.Sequence;
    }

    public Task<ShardHits> SearchAsync(ShardQuery query, CancellationToken cancellationToken = default)
    {
        IVectorIndex index = CheckAvailable();
        ArgumentNullException.ThrowIfNull(query);
        if (query.K <= 0 || query.Count < 0 || query.Queries.Length != (long)query.Count * index.Dimension)
        {
            throw new ArgumentException($"A shard query needs K > 0 and Count × {index.Dimension} floats; got K = {query.K}, Count = {query.Count}, {query.Queries.Length} floats.", nameof(query));
        }

        var options = new SearchOptions { Filter = query.Filter?.ToPredicate(), SearchWidth = query.SearchWidth, MaxDegreeOfParallelism = 1 };
        var hits = new SearchHit[checked(query.Count * query.K)];
        var counts = new int[query.Count];
        if (query.Count == 1)
        {
            counts[0] = index.Search(query.Queries, hits, options);
        }
        else if (query.Count > 1)
        {
            BatchSearchResults batch = index.SearchBatch(query.Queries, query.K, options, cancellationToken: cancellationToken);
            for (int q = 0; q < query.Count; q++)
            {
                ReadOnlySpan<SearchHit> row = batch[q];
                row.CopyTo(hits.AsSpan(q * query.K));
                counts[q] = row.Length;
            }
        }

        return Task.FromResult(new ShardHits(hits, counts));
    }

    public Task<float[]?> GetVectorAsync(long id)
    {
        IVectorIndex index = CheckAvailable();
        var vector = new float[index.Dimension];
        return Task.FromResult(index.TryGetVector(id, vector) ? vector : null);
    }

    public Task<long[]> GetIdsAsync() => Task.FromResult(CheckAvailable().GetIds());

    public Task<ShardStatus> GetStatusAsync() => Task.FromResult(new ShardStatus(
        _shard, _replica, _problem is null, _problem, _index?.Count ?? 0, _sequence, RuntimeIdentity));

    public Task ResetAsync()
    {
        DeactivateOnIdle();
        return Task.CompletedTask;
    }

    private IVectorIndex CheckAvailable()
    {
        if (_problem is not null || _index is null)
        {
            throw new ShardUnavailableException($"Shard {_shard} of '{_collection}' (copy {_replica}) is unavailable: {_problem}", [_shard], transient: _problemIsTransient);
        }

        return _index;
    }

    private IVectorIndex CheckWritable(long[] ids)
    {
        IVectorIndex index = CheckAvailable();
        if (!IsPrimary)
        {
            throw new InvalidOperationException($"Writes go to copy 0 of shard {_shard}; this is copy {_replica}.");
        }

        ArgumentNullException.ThrowIfNull(ids);
        var seen = new HashSet<long>(ids.Length);
        foreach (long id in ids)
        {
            int owner = ShardHash.ShardOf(id, _definition!.ShardCount);
            if (owner != _shard)
            {
                throw new ArgumentException($"Id {id} belongs to shard {owner}, not shard {_shard}.", nameof(ids));
            }

            if (!seen.Add(id))
            {
                throw new ArgumentException($"Id {id} appears twice in one write.", nameof(ids));
            }
        }

        return index;
    }

    private async Task<ShardWriteAck> LogAndForwardAsync(WriteRecord record, int changed)
    {
        try
        {
            await _store.AppendLogAsync(_collection, _shard, WriteLogCodec.Encode(record, _definition!.Dimension));
        }
        catch
        {
            // The index holds a change the log does not: drop this activation so the next one reloads the durable state.
            _problem = "the write-ahead log append failed; the copy re-activates from the store";
            _problemIsTransient = true;
            DeactivateOnIdle();
            throw;
        }

        _sequence = record.Sequence;
        int applied = 1;
        if (_definition.ReplicaCount > 1)
        {
            var forwards = new Task<bool>[_definition.ReplicaCount - 1];
            for (int r = 1; r < _definition.ReplicaCount; r++)
            {
                forwards[r - 1] = ForwardAsync(r, record);
            }

            foreach (bool ok in await Task.WhenAll(forwards))
            {
                applied += ok ? 1 : 0;
            }
        }

        if (++_writesSinceSnapshot >= _definition.SnapshotEveryWrites)
        {
            try
            {
                await SnapshotAsync(CancellationToken.None);
            }
            catch (Exception e) when (e is IOException or UnauthorizedAccessException)
            {
                // The write is in the log already; a later snapshot retries.
                _log.LogWarning(e, "Shard {Collection}/{Shard}: snapshot failed", _collection, _shard);
            }
        }

        return new ShardWriteAck(_shard, record.Sequence, applied, changed);
    }

    private async Task<bool> ForwardAsync(int replica, WriteRecord record)
    {
        try
        {
            using var timeout = new CancellationTokenSource(_options.ReplicaForwardTimeout);
            return await GrainFactory.GetGrain<IShardGrain>(ShardKey.Format(_collection, _shard, replica)).ApplyAsync(record).WaitAsync(timeout.Token);
        }
        catch (Exception e) when (e is not OutOfMemoryException)
        {
            // The replica will catch up from the log; the write is durable already.
            _log.LogInformation(e, "Shard {Collection}/{Shard}: forward of write {Sequence} to copy {Replica} failed", _collection, _shard, record.Sequence, replica);
            return false;
        }
    }

    private async Task SnapshotAsync(CancellationToken cancellationToken)
    {
        await _store.SaveSnapshotAsync(_collection, _shard, _index!, _sequence, cancellationToken);
        await _store.ReplaceLogAsync(_collection, _shard, ReadOnlyMemory<byte>.Empty, cancellationToken);
        _writesSinceSnapshot = 0;
    }

    private async Task ReloadAsync()
    {
        _index?.Dispose();
        _index = null;
        _sequence = 0;
        await LoadAsync(CancellationToken.None);
    }

    private async Task LoadAsync(CancellationToken cancellationToken)
    {
        try
        {
            _definition = await _store.LoadCollectionAsync(_collection, cancellationToken);
            if (_definition is null)
            {
                _problem = $"collection '{_collection}' does not exist in the store.";
                return;
            }

            if (_shard >= _definition.ShardCount || _replica >= _definition.ReplicaCount)
            {
                _problem = $"collection '{_collection}' has {_definition.ShardCount} shards of {_definition.ReplicaCount} copies; there is no shard {_shard} copy {_replica}.";
                return;
            }

            IVectorIndex index;
            long sequence = 0;
            (IVectorIndex Index, long Sequence)? snapshot = await _store.LoadSnapshotAsync(_collection, _shard, cancellationToken);
            if (snapshot is { } s)
            {
                (index, sequence) = s;
                if (index.Dimension != _definition.Dimension || index.Metric != _definition.Metric)
                {
                    index.Dispose();
                    _problem = $"the snapshot holds dimension {s.Index.Dimension}, {s.Index.Metric}; the collection is dimension {_definition.Dimension}, {_definition.Metric}.";
                    return;
                }
            }
            else
            {
                index = _factory.Create(_definition, _shard);
            }

            byte[] log = await _store.ReadLogAsync(_collection, _shard, cancellationToken);
            (List<WriteRecord> records, int validBytes) = WriteLogCodec.Decode(log, _definition.Dimension);
            foreach (WriteRecord record in records)
            {
                if (record.Sequence > sequence)
                {
                    if (record.Sequence != sequence + 1)
                    {
                        index.Dispose();
                        _problem = $"the write-ahead log continues at write {record.Sequence} but the snapshot ends at write {sequence}.";
                        return;
                    }

                    Apply(index, record);
                    sequence = record.Sequence;
                }
            }

            string? foreign = ForeignId(index, _definition.ShardCount);
            if (foreign is not null)
            {
                index.Dispose();
                _problem = foreign;
                return;
            }

            if (IsPrimary && validBytes < log.Length)
            {
                // Cut the torn tail of a crashed append so new records follow a valid one.
                await _store.ReplaceLogAsync(_collection, _shard, log.AsMemory(0, validBytes), cancellationToken);
            }

            _index = index;
            _sequence = sequence;
            _writesSinceSnapshot = records.Count;
            _problem = null;
        }
        catch (Exception e) when (e is IOException or InvalidDataException or UnauthorizedAccessException or ArgumentException or InvalidOperationException)
        {
            _problem = $"loading failed: {e.GetType().Name}: {e.Message}";
        }
    }

    private string? ForeignId(IVectorIndex index, int shardCount)
    {
        foreach (long id in index.GetIds())
        {
            int owner = ShardHash.ShardOf(id, shardCount);
            if (owner != _shard)
            {
                return $"the shard's files hold id {id}, which belongs to shard {owner}; it would be a duplicate across shards.";
            }
        }

        return null;
    }

    private static void Apply(IVectorIndex index, WriteRecord record)
    {
        if (record.Kind == WriteKind.Upsert)
        {
            index.AddOrReplaceRange(record.Ids, record.Vectors);
        }
        else
        {
            index.RemoveRange(Array.FindAll(record.Ids, index.Contains));
        }
    }
}
