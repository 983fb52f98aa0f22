using System.Linq.Expressions;
using System.Runtime.CompilerServices;
using Microsoft.Extensions.AI;
using Microsoft.Extensions.VectorData;
using Microsoft.Extensions.VectorData.ProviderServices;
using VectorKit.Indexes;

namespace VectorKit.VectorData;

/// <summary>
/// A collection of records in a <see cref="VectorKitStore"/>, searched through VectorKit's indexes: vector search with
/// filters evaluated during the index search, filtered retrieval, and keyword + vector hybrid search (BM25 fused
/// with the vector results by reciprocal rank fusion).
/// </summary>
/// <typeparam name="TKey">The key type: <see cref="int"/>, <see cref="long"/>, <see cref="Guid"/> or <see cref="string"/>
/// (<see cref="object"/> for a dynamic collection, whose key property names one of those).</typeparam>
/// <typeparam name="TRecord">The record type, described by attributes or a definition; <c>Dictionary&lt;string, object?&gt;</c>
/// for a dynamic collection.</typeparam>
/// <remarks>
/// <para>Thread safety: every member may be called concurrently. Collection objects for the same name share one set
/// of data; reads (gets, searches, saves) run concurrently, and each write (an upsert or delete, single or batch) is
/// applied whole under an exclusive lock, so a reader sees a batch entirely or not at all.</para>
/// <para>A batch upsert is atomic: it is validated whole (null records, null or repeated keys, vector dimensions,
/// values) and embeddings are generated before anything is written. Cancellation is observed before the write
/// starts; a write that has started completes.</para>
/// <para>Errors: a null argument throws <see cref="ArgumentNullException"/>; an invalid argument (top below 1, a
/// negative skip, a repeated key in one batch, a vector of the wrong dimension) <see cref="ArgumentException"/>; an
/// unsupported filter, index kind, distance function or search input <see cref="NotSupportedException"/>; an
/// operation on a collection that does not exist, and a failure reading or writing the store directory,
/// <see cref="VectorStoreException"/>.</para>
/// </remarks>
public sealed class VectorKitCollection<TKey, TRecord> : VectorStoreCollection<TKey, TRecord>, IKeywordHybridSearchable<TRecord>
    where TKey : notnull
    where TRecord : class
{
    private readonly VectorKitStore _store;
    private readonly CollectionModel _model;
    private readonly VectorStoreCollectionMetadata _metadata;
    private CollectionState? _checkedState;

    internal VectorKitCollection(VectorKitStore store, string name, VectorKitCollectionOptions? options, bool dynamic)
    {
        _store = store;
        Name = name;
        IEmbeddingGenerator? generator = options?.EmbeddingGenerator ?? store.Options.EmbeddingGenerator;
        var builder = new VectorKitModelBuilder();
        _model = dynamic
            ? builder.BuildDynamic(options?.Definition ?? throw new ArgumentException("A dynamic collection needs a definition.", nameof(options)), generator)
            : builder.Build(typeof(TRecord), typeof(TKey), options?.Definition, generator);
        Type keyType = _model.KeyProperty.Type;
        if (keyType != typeof(int) && keyType != typeof(long) && keyType != typeof(Guid) && keyType != typeof(string))
        {
            throw new NotSupportedException($"Key property '{_model.KeyProperty.ModelName}' has type {keyType}; VectorKit supports int, long, Guid and string keys.");
        }

        foreach (VectorPropertyModel vector in _model.VectorProperties)
        {
            if (vector.Dimensions < 1)
            {
                throw new ArgumentException($"Vector property '{vector.ModelName}' has {vector.Dimensions} dimensions; at least 1 is needed.", nameof(options));
            }

            VectorSlot.ResolveIndexKind(vector.StorageName, vector.IndexKind);
            VectorSlot.ResolveDistanceFunction(vector.StorageName, vector.DistanceFunction);
        }

        _metadata = new VectorStoreCollectionMetadata
        {
            VectorStoreSystemName = VectorKitStore.SystemName,
            VectorStoreName = store.Options.Directory,
            CollectionName = name,
        };
    }

    /// <inheritdoc/>
    public override string Name { get; }

    /// <inheritdoc/>
    public override Task<bool> CollectionExistsAsync(CancellationToken cancellationToken = default)
    {
        cancellationToken.ThrowIfCancellationRequested();
        return Task.FromResult(_store.TryGetState(Name, "CollectionExists", out _));
    }

    /// <inheritdoc/>
    /// <exception cref="VectorStoreException">The collection exists with a different key type or vector property.</exception>
    public override Task EnsureCollectionExistsAsync(CancellationToken cancellationToken = default)
    {
        cancellationToken.ThrowIfCancellationRequested();
        CollectionState state = _store.GetOrCreateState(Name, _model);
        CheckSchema(state, "EnsureCollectionExists");
        return Task.CompletedTask;
    }

    /// <inheritdoc/>
    public override Task EnsureCollectionDeletedAsync(CancellationToken cancellationToken = default)
    {
        cancellationToken.ThrowIfCancellationRequested();
        _store.DeleteState(Name);
        return Task.CompletedTask;
    }

    /// <summary>
    /// Saves this collection (index, records and key map together) to its file in the store directory: written to a
    /// temporary file, flushed, then renamed over the old one, so a crash leaves the old or the new file whole.
    /// </summary>
    /// <param name="cancellationToken">Cancels the save before the rename; the old file is then kept.</param>
    /// <exception cref="InvalidOperationException">The store has no directory.</exception>
    /// <exception cref="VectorStoreException">The collection does not exist, or the file could not be written.</exception>
    public Task SaveAsync(CancellationToken cancellationToken = default) =>
        _store.SaveStateAsync(RequireState("Save"), cancellationToken);

    /// <inheritdoc/>
    public override Task<TRecord?> GetAsync(TKey key, RecordRetrievalOptions? options = null, CancellationToken cancellationToken = default)
    {
        ArgumentNullException.ThrowIfNull(key);
        cancellationToken.ThrowIfCancellationRequested();
        bool includeVectors = CheckIncludeVectors(options?.IncludeVectors ?? false);
        CollectionState state = RequireState("Get");
        using (ReadLock(state, "Get"))
        {
            return Task.FromResult(state.Ids.TryGetValue(CheckKey(key, nameof(key)), out long id) ? Materialize(state.Records[id], includeVectors) : null);
        }
    }

    /// <inheritdoc/>
    public override async IAsyncEnumerable<TRecord> GetAsync(IEnumerable<TKey> keys, RecordRetrievalOptions? options = null, [EnumeratorCancellation] CancellationToken cancellationToken = default)
    {
        ArgumentNullException.ThrowIfNull(keys);
        cancellationToken.ThrowIfCancellationRequested();
        bool includeVectors = CheckIncludeVectors(options?.IncludeVectors ?? false);
        CollectionState state = RequireState("Get");
        var found = new List<TRecord>();
        using (ReadLock(state, "Get"))
        {
            foreach (TKey key in keys)
            {
                if (state.Ids.TryGetValue(CheckKey(key, nameof(keys)), out long id))
                {
                    found.Add(Materialize(state.Records[id], includeVectors));
                }
            }
        }

        foreach (TRecord record in found)
        {
            cancellationToken.ThrowIfCancellationRequested();
            yield return record;
            await Task.CompletedTask.ConfigureAwait(false);
        }
    }

    /// <inheritdoc/>
    /// <remarks>
    /// Without <see cref="FilteredRecordRetrievalOptions{TRecord}.OrderBy"/> records come in the order they were first
    /// stored. Ordering compares values with nulls first; ties keep that order.
    /// </remarks>
    public override async IAsyncEnumerable<TRecord> GetAsync(Expression<Func<TRecord, bool>> filter, int top, FilteredRecordRetrievalOptions<TRecord>? options = null, [EnumeratorCancellation] CancellationToken cancellationToken = default)
    {
        ArgumentNullException.ThrowIfNull(filter);
        ArgumentOutOfRangeException.ThrowIfLessThan(top, 1);
        int skip = options?.Skip ?? 0;
        ArgumentOutOfRangeException.ThrowIfNegative(skip, "options.Skip");
        cancellationToken.ThrowIfCancellationRequested();
        bool includeVectors = CheckIncludeVectors(options?.IncludeVectors ?? false);
        Func<StoredRecord, bool> predicate = new FilterCompiler().Compile(filter, _model);
        List<(string Name, bool Ascending)> order = [];
        if (options?.OrderBy is { } orderBy)
        {
            foreach (FilteredRecordRetrievalOptions<TRecord>.OrderByDefinition.SortInfo sort in orderBy(new()).Values)
            {
                order.Add((_model.GetDataOrKeyProperty(sort.PropertySelector).StorageName, sort.Ascending));
            }
        }

        CollectionState state = RequireState("Get");
        List<TRecord> result;
        using (ReadLock(state, "Get"))
        {
            var matching = new List<StoredRecord>();
            foreach (StoredRecord record in state.Records.Values)
            {
                if (predicate(record))
                {
                    matching.Add(record);
                }
            }

            matching.Sort((x, y) =>
            {
                foreach ((string name, bool ascending) in order)
                {
                    int c = CompareValues(ValueOf(x, name), ValueOf(y, name));
                    if (c != 0)
                    {
                        return ascending ? c : -c;
                    }
                }

                return x.Id.CompareTo(y.Id);
            });

            result = new List<TRecord>(Math.Min(top, Math.Max(0, matching.Count - skip)));
            for (int i = skip; i < matching.Count && result.Count < top; i++)
            {
                result.Add(Materialize(matching[i], includeVectors));
            }
        }

        foreach (TRecord record in result)
        {
            cancellationToken.ThrowIfCancellationRequested();
            yield return record;
            await Task.CompletedTask.ConfigureAwait(false);
        }
    }

    /// <inheritdoc/>
    public override Task DeleteAsync(TKey key, CancellationToken cancellationToken = default) => DeleteAsync([key], cancellationToken);

    /// <inheritdoc/>
    /// <remarks>Keys not found are ignored. The batch is applied whole under the write lock.</remarks>
    public override Task DeleteAsync(IEnumerable<TKey> keys, CancellationToken cancellationToken = default)
    {
        ArgumentNullException.ThrowIfNull(keys);
        var wanted = new List<object>();
        foreach (TKey key in keys)
        {
            wanted.Add(CheckKey(key, nameof(keys)));
        }

        cancellationToken.ThrowIfCancellationRequested();
        CollectionState state = RequireState("Delete");
        state.Lock.EnterWriteLock();
        try
        {
            ThrowIfDeleted(state, "Delete");
            var ids = new HashSet<long>();
            foreach (object key in wanted)
            {
                if (state.Ids.TryGetValue(key, out long id))
                {
                    ids.Add(id);
                }
            }

            foreach (VectorSlot slot in state.Slots.Values)
            {
                slot.Remove(ids);
            }

            foreach (long id in ids)
            {
                StoredRecord record = state.Records[id];
                state.Records.Remove(id);
                state.Ids.Remove(record.Key);
                foreach (Bm25Index text in state.FullText.Values)
                {
                    text.Remove(id);
                }
            }
        }
        finally
        {
            state.Lock.ExitWriteLock();
        }

        return Task.CompletedTask;
    }

    /// <inheritdoc/>
    public override Task UpsertAsync(TRecord record, CancellationToken cancellationToken = default)
    {
        ArgumentNullException.ThrowIfNull(record);
        return UpsertAsync([record], cancellationToken);
    }

    /// <inheritdoc/>
    /// <exception cref="ArgumentNullException">The sequence or one of its records is null.</exception>
    /// <exception cref="ArgumentException">A key is null or repeated within the batch, or a vector has the wrong dimension or is not finite.</exception>
    public override async Task UpsertAsync(IEnumerable<TRecord> records, CancellationToken cancellationToken = default)
    {
        ArgumentNullException.ThrowIfNull(records);
        List<TRecord> batch = [.. records];
        for (int i = 0; i < batch.Count; i++)
        {
            if (batch[i] is null)
            {
                throw new ArgumentNullException(nameof(records), $"Record {i} of the batch is null.");
            }
        }

        CollectionState state = RequireState("Upsert");
        KeyPropertyModel keyProperty = _model.KeyProperty;
        var keys = new object[batch.Count];
        var seen = new HashSet<object>(KeyComparer.Instance);
        for (int i = 0; i < batch.Count; i++)
        {
            object? key = keyProperty.GetValueAsObject(batch[i]);
            if (keyProperty.IsAutoGenerated && key is Guid g && g == Guid.Empty)
            {
                key = Guid.NewGuid();
            }

            keys[i] = CheckKey(key, nameof(records));
            if (!seen.Add(keys[i]))
            {
                throw new ArgumentException($"Key '{keys[i]}' appears more than once in the batch (record {i}); each key may appear once.", nameof(records));
            }
        }

        // Embeddings first, outside the lock: generation may be slow or remote.
        var vectors = new float[_model.VectorProperties.Count][];
        var present = new bool[_model.VectorProperties.Count][];
        for (int v = 0; v < _model.VectorProperties.Count; v++)
        {
            VectorPropertyModel property = _model.VectorProperties[v];
            float[]?[] values = await VectorValuesAsync(property, batch, cancellationToken).ConfigureAwait(false);
            (vectors[v], present[v]) = CheckVectors(property, values, state);
        }

        var stored = new Dictionary<string, object?>[batch.Count];
        for (int i = 0; i < batch.Count; i++)
        {
            var values = new Dictionary<string, object?>(StringComparer.Ordinal);
            foreach (DataPropertyModel data in _model.DataProperties)
            {
                values[data.StorageName] = ValueCodec.ToStored(data.GetValueAsObject(batch[i]), data.Type);
            }

            stored[i] = values;
        }

        cancellationToken.ThrowIfCancellationRequested();
        state.Lock.EnterWriteLock();
        try
        {
            ThrowIfDeleted(state, "Upsert");
            var ids = new long[batch.Count];
            long next = state.NextId;
            for (int i = 0; i < batch.Count; i++)
            {
                ids[i] = state.Ids.TryGetValue(keys[i], out long id) ? id : next++;
            }

            if (next > int.MaxValue)
            {
                throw new VectorStoreException($"Collection '{Name}' has used all {int.MaxValue} internal ids.") { CollectionName = Name, OperationName = "Upsert" };
            }

            for (int v = 0; v < _model.VectorProperties.Count; v++)
            {
                VectorSlot slot = state.Slots[_model.VectorProperties[v].StorageName];
                List<long> withVector = [], without = [];
                for (int i = 0; i < batch.Count; i++)
                {
                    (present[v][i] ? withVector : without).Add(ids[i]);
                    if (present[v][i])
                    {
                        stored[i][slot.StorageName] = vectors[v].AsSpan((withVector.Count - 1) * slot.Dimension, slot.Dimension).ToArray();
                    }
                }

                slot.Remove(without);
                slot.Upsert([.. withVector], vectors[v]);
            }

            state.NextId = next;
            for (int i = 0; i < batch.Count; i++)
            {
                state.Ids[keys[i]] = ids[i];
                state.Records[ids[i]] = new StoredRecord(ids[i], keys[i], stored[i]);
                foreach ((string name, Bm25Index text) in state.FullText)
                {
                    text.Set(ids[i], stored[i].GetValueOrDefault(name) as string);
                }

                if (keyProperty.IsAutoGenerated && keyProperty.GetValueAsObject(batch[i]) is Guid g && g == Guid.Empty)
                {
                    keyProperty.SetValueAsObject(batch[i], keys[i]);
                }
            }

            foreach (VectorPropertyModel vector in _model.VectorProperties)
            {
                state.Slots[vector.StorageName].SwitchWhenReady();
            }
        }
        finally
        {
            state.Lock.ExitWriteLock();
        }
    }

    /// <inheritdoc/>
    /// <remarks>
    /// The search value may be a <c>ReadOnlyMemory&lt;float&gt;</c>, a <c>float[]</c>, an <c>Embedding&lt;float&gt;</c>, or any
    /// input the vector property's embedding generator accepts (typically a string). The filter is compiled once and
    /// evaluated inside the index search, so top results are returned whenever that many records pass it (an
    /// approximate index may reach fewer). Scores follow the property's distance function: similarities (higher is
    /// better) for <c>CosineSimilarity</c> and <c>DotProductSimilarity</c>, distances (lower is better) otherwise.
    /// </remarks>
    public override async IAsyncEnumerable<VectorSearchResult<TRecord>> SearchAsync<TInput>(TInput searchValue, int top, VectorSearchOptions<TRecord>? options = null, [EnumeratorCancellation] CancellationToken cancellationToken = default)
    {
        ArgumentNullException.ThrowIfNull(searchValue);
        ArgumentOutOfRangeException.ThrowIfLessThan(top, 1);
        options ??= new VectorSearchOptions<TRecord>();
        ArgumentOutOfRangeException.ThrowIfNegative(options.Skip, "options.Skip");
        bool includeVectors = CheckIncludeVectors(options.IncludeVectors);
        VectorPropertyModel property = _model.GetVectorPropertyOrSingle(options);
        Func<StoredRecord, bool>? predicate = options.Filter is null ? null : new FilterCompiler().Compile(options.Filter, _model);
        CollectionState state = RequireState("Search");
        float[] query = await QueryVectorAsync(searchValue, property, cancellationToken).ConfigureAwait(false);
        cancellationToken.ThrowIfCancellationRequested();

        var results = new List<VectorSearchResult<TRecord>>();
        using (ReadLock(state, "Search"))
        {
            VectorSlot slot = state.Slots[property.StorageName];
            SearchHit[] hits = slot.Search(query, checked(top + options.Skip), IdFilter(state, predicate));
            for (int i = options.Skip; i < hits.Length; i++)
            {
                double score = slot.Score(hits[i].Distance);
                if (!slot.Passes(score, options.ScoreThreshold))
                {
                    break; // hits are ordered, so every later one fails too
                }

                results.Add(new VectorSearchResult<TRecord>(Materialize(state.Records[hits[i].Id], includeVectors), score));
            }
        }

        foreach (VectorSearchResult<TRecord> result in results)
        {
            cancellationToken.ThrowIfCancellationRequested();
            yield return result;
            await Task.CompletedTask.ConfigureAwait(false);
        }
    }

    /// <inheritdoc/>
    /// <remarks>
    /// The vector list (the index search with the filter inside it) and the keyword list (BM25 over the full-text
    /// property, the same filter applied to each matching record) are each cut to
    /// max(<see cref="VectorKitStoreOptions.FusionDepth"/>, top + skip) and fused by reciprocal rank fusion: a record
    /// scores Σ 1 / (k + rank) over the lists it appears in, rank one-based, k =
    /// <see cref="VectorKitStoreOptions.FusionRankConstant"/>. Results are ordered by that score (ties by vector rank,
    /// then keyword rank), and the score reported and compared with the score threshold is the fused score (higher
    /// is better). Keywords are split into terms as the indexed text is.
    /// </remarks>
    public async IAsyncEnumerable<VectorSearchResult<TRecord>> HybridSearchAsync<TInput>(TInput searchValue, ICollection<string> keywords, int top, HybridSearchOptions<TRecord>? options = null, [EnumeratorCancellation] CancellationToken cancellationToken = default)
        where TInput : notnull
    {
        ArgumentNullException.ThrowIfNull(searchValue);
        ArgumentNullException.ThrowIfNull(keywords);
        ArgumentOutOfRangeException.ThrowIfLessThan(top, 1);
        options ??= new HybridSearchOptions<TRecord>();
        ArgumentOutOfRangeException.ThrowIfNegative(options.Skip, "options.Skip");
        bool includeVectors = CheckIncludeVectors(options.IncludeVectors);
        VectorPropertyModel property = _model.GetVectorPropertyOrSingle(new VectorSearchOptions<TRecord> { VectorProperty = options.VectorProperty });
        DataPropertyModel text = _model.GetFullTextDataPropertyOrSingle(options.AdditionalProperty);
        Func<StoredRecord, bool>? predicate = options.Filter is null ? null : new FilterCompiler().Compile(options.Filter, _model);
        CollectionState state = RequireState("HybridSearch");
        float[] query = await QueryVectorAsync(searchValue, property, cancellationToken).ConfigureAwait(false);
        cancellationToken.ThrowIfCancellationRequested();

        VectorKitStoreOptions settings = _store.Options;
        int depth = Math.Max(settings.FusionDepth, checked(top + options.Skip));
        var results = new List<VectorSearchResult<TRecord>>();
        using (ReadLock(state, "HybridSearch"))
        {
            Func<long, bool>? filter = IdFilter(state, predicate);
            SearchHit[] vectorHits = state.Slots[property.StorageName].Search(query, depth, filter);
            if (!state.FullText.TryGetValue(text.StorageName, out Bm25Index? bm25))
            {
                throw new VectorStoreException($"Property '{text.ModelName}' is not full-text indexed in collection '{Name}'.") { CollectionName = Name, OperationName = "HybridSearch" };
            }

            List<(long Id, double Score)> keywordHits = bm25.Search(keywords, settings.Bm25K1, settings.Bm25B, filter, depth, cancellationToken);
            var fused = new Dictionary<long, (double Score, int VectorRank, int KeywordRank)>();
            for (int r = 0; r < vectorHits.Length; r++)
            {
                fused[vectorHits[r].Id] = (1.0 / (settings.FusionRankConstant + r + 1), r, int.MaxValue);
            }

            for (int r = 0; r < keywordHits.Count; r++)
            {
                double add = 1.0 / (settings.FusionRankConstant + r + 1);
                fused[keywordHits[r].Id] = fused.TryGetValue(keywordHits[r].Id, out var entry)
                    ? (entry.Score + add, entry.VectorRank, r)
                    : (add, int.MaxValue, r);
            }

            var ranked = fused.ToList();
            ranked.Sort(static (x, y) =>
            {
                int c = y.Value.Score.CompareTo(x.Value.Score);
                if (c == 0)
                {
                    c = x.Value.VectorRank.CompareTo(y.Value.VectorRank);
                }

                return c != 0 ? c : x.Value.KeywordRank.CompareTo(y.Value.KeywordRank);
            });

            for (int i = options.Skip; i < ranked.Count && results.Count < top; i++)
            {
                double score = ranked[i].Value.Score;
                if (options.ScoreThreshold is double threshold && score < threshold)
                {
                    break;
                }

                results.Add(new VectorSearchResult<TRecord>(Materialize(state.Records[ranked[i].Key], includeVectors), score));
            }
        }

        foreach (VectorSearchResult<TRecord> result in results)
        {
            cancellationToken.ThrowIfCancellationRequested();
            yield return result;
            await Task.CompletedTask.ConfigureAwait(false);
        }
    }

    /// <inheritdoc/>
    public override object? GetService(Type serviceType, object? serviceKey = null)
    {
        ArgumentNullException.ThrowIfNull(serviceType);
        return serviceKey is not null ? null
            : serviceType == typeof(VectorStoreCollectionMetadata) ? _metadata
            : serviceType.IsInstanceOfType(this) ? this
            : null;
    }

    private CollectionState RequireState(string operation)
    {
        if (!_store.TryGetState(Name, operation, out CollectionState? state))
        {
            throw new VectorStoreException($"Collection '{Name}' does not exist; call EnsureCollectionExistsAsync first.")
            {
                VectorStoreSystemName = VectorKitStore.SystemName,
                CollectionName = Name,
                OperationName = operation,
            };
        }

        if (!ReferenceEquals(Volatile.Read(ref _checkedState), state))
        {
            CheckSchema(state, operation);
            Volatile.Write(ref _checkedState, state);
        }

        return state;
    }

    private void ThrowIfDeleted(CollectionState state, string operation)
    {
        if (state.Deleted)
        {
            throw new VectorStoreException($"Collection '{Name}' was deleted.") { VectorStoreSystemName = VectorKitStore.SystemName, CollectionName = Name, OperationName = operation };
        }
    }

    private void CheckSchema(CollectionState state, string operation)
    {
        string? problem = null;
        if (state.KeyType != _model.KeyProperty.Type)
        {
            problem = $"its keys are {state.KeyType}, this record type's are {_model.KeyProperty.Type}";
        }

        foreach (VectorPropertyModel vector in _model.VectorProperties)
        {
            if (!state.Slots.TryGetValue(vector.StorageName, out VectorSlot? slot))
            {
                problem ??= $"it has no vector property '{vector.StorageName}'";
            }
            else if (slot.Dimension != vector.Dimensions
                     || slot.IndexKind != VectorSlot.ResolveIndexKind(vector.StorageName, vector.IndexKind)
                     || slot.DistanceFunction != VectorSlot.ResolveDistanceFunction(vector.StorageName, vector.DistanceFunction))
            {
                problem ??= $"its vector property '{vector.StorageName}' has {slot.Dimension} dimensions, index kind {slot.IndexKind} and distance "
                    + $"function {slot.DistanceFunction}; this record type asks for {vector.Dimensions}, {vector.IndexKind ?? "(default)"} and {vector.DistanceFunction ?? "(default)"}";
            }
        }

        if (problem is not null)
        {
            throw new VectorStoreException($"Collection '{Name}' exists with a different schema: {problem}.")
            {
                VectorStoreSystemName = VectorKitStore.SystemName,
                CollectionName = Name,
                OperationName = operation,
            };
        }

        bool missingText = false;
        foreach (DataPropertyModel data in _model.DataProperties)
        {
            missingText |= data.IsFullTextIndexed && !state.FullText.ContainsKey(data.StorageName);
        }

        if (missingText)
        {
            state.Lock.EnterWriteLock();
            try
            {
                foreach (DataPropertyModel data in _model.DataProperties)
                {
                    if (data.IsFullTextIndexed)
                    {
                        state.EnsureFullText(data.StorageName);
                    }
                }
            }
            finally
            {
                state.Lock.ExitWriteLock();
            }
        }
    }

    private object CheckKey(object? key, string paramName)
    {
        if (key is null || (key is string s && s.Length == 0))
        {
            throw new ArgumentException("A record key is null or empty.", paramName);
        }

        if (key.GetType() != _model.KeyProperty.Type)
        {
            throw new ArgumentException($"A key of type {key.GetType()} was given; the key property '{_model.KeyProperty.ModelName}' is {_model.KeyProperty.Type}.", paramName);
        }

        return key;
    }

    private bool CheckIncludeVectors(bool includeVectors)
    {
        if (includeVectors && _model.EmbeddingGenerationRequired)
        {
            throw new NotSupportedException(VectorDataStrings.IncludeVectorsNotSupportedWithEmbeddingGeneration);
        }

        return includeVectors;
    }

    private ReadLockScope ReadLock(CollectionState state, string operation)
    {
        state.Lock.EnterReadLock();
        if (state.Deleted)
        {
            state.Lock.ExitReadLock();
            ThrowIfDeleted(state, operation);
        }

        return new ReadLockScope(state.Lock);
    }

    private static Func<long, bool>? IdFilter(CollectionState state, Func<StoredRecord, bool>? predicate) =>
        predicate is null ? null : id => state.Records.TryGetValue(id, out StoredRecord? record) && predicate(record);

    private static object? ValueOf(StoredRecord record, string name) =>
        record.Values.TryGetValue(name, out object? value) ? value : record.Key;

    private static int CompareValues(object? x, object? y) =>
        x is null ? (y is null ? 0 : -1)
        : y is null ? 1
        : x is string s && y is string t ? string.CompareOrdinal(s, t)
        : ((IComparable)x).CompareTo(y);

    private TRecord Materialize(StoredRecord stored, bool includeVectors)
    {
        TRecord record = _model.CreateRecord<TRecord>();
        _model.KeyProperty.SetValueAsObject(record, stored.Key);
        foreach (DataPropertyModel data in _model.DataProperties)
        {
            data.SetValueAsObject(record, ValueCodec.FromStored(stored.Values.GetValueOrDefault(data.StorageName), data.Type));
        }

        if (includeVectors)
        {
            foreach (VectorPropertyModel vector in _model.VectorProperties)
            {
                vector.SetValueAsObject(record, ValueCodec.VectorFromStored(stored.Values.GetValueOrDefault(vector.StorageName) as float[], vector.Type));
            }
        }

        return record;
    }

    private static async Task<float[]?[]> VectorValuesAsync(VectorPropertyModel property, List<TRecord> batch, CancellationToken cancellationToken)
    {
        var result = new float[]?[batch.Count];
        if (property.EmbeddingGenerator is null || VectorKitModelBuilder.IsNativeVectorType(property.Type))
        {
            for (int i = 0; i < batch.Count; i++)
            {
                result[i] = ValueCodec.VectorToStored(property.GetValueAsObject(batch[i]));
            }

            return result;
        }

        var inputs = new List<object>();
        var positions = new List<int>();
        for (int i = 0; i < batch.Count; i++)
        {
            if (property.GetValueAsObject(batch[i]) is { } input)
            {
                inputs.Add(input);
                positions.Add(i);
            }
        }

        if (inputs.Count > 0)
        {
            IReadOnlyList<Embedding> embeddings = await property.GenerateEmbeddingsAsync(inputs, cancellationToken).ConfigureAwait(false);
            if (embeddings.Count != inputs.Count)
            {
                throw new InvalidOperationException($"The embedding generator of '{property.ModelName}' returned {embeddings.Count} embeddings for {inputs.Count} inputs.");
            }

            for (int i = 0; i < inputs.Count; i++)
            {
                result[positions[i]] = embeddings[i] is Embedding<float> e
                    ? e.Vector.ToArray()
                    : throw new NotSupportedException($"The embedding generator of '{property.ModelName}' returned {embeddings[i].GetType()}; VectorKit stores Embedding<float>.");
            }
        }

        return result;
    }

    private (float[] Flat, bool[] Present) CheckVectors(VectorPropertyModel property, float[]?[] values, CollectionState state)
    {
        int dimension = property.Dimensions;
        bool cosine = state.Slots.TryGetValue(property.StorageName, out VectorSlot? slot) && slot.Metric == Distance.DistanceMetric.Cosine;
        var present = new bool[values.Length];
        int count = 0;
        for (int i = 0; i < values.Length; i++)
        {
            if (values[i] is not { } v)
            {
                continue;
            }

            if (v.Length != dimension)
            {
                throw new ArgumentException($"Record {i}: vector property '{property.ModelName}' has {v.Length} dimensions; the collection expects {dimension}.", "records");
            }

            bool zero = true;
            foreach (float x in v)
            {
                if (!float.IsFinite(x))
                {
                    throw new ArgumentException($"Record {i}: vector property '{property.ModelName}' holds {x}; values must be finite.", "records");
                }

                zero &= x == 0;
            }

            if (zero && cosine)
            {
                throw new ArgumentException($"Record {i}: vector property '{property.ModelName}' is all zeros, which has no direction under cosine distance.", "records");
            }

            present[i] = true;
            count++;
        }

        float[] flat = new float[checked(count * dimension)];
        int row = 0;
        for (int i = 0; i < values.Length; i++)
        {
            if (present[i])
            {
                values[i]!.CopyTo(flat.AsSpan(row++ * dimension));
            }
        }

        return (flat, present);
    }

    private static async Task<float[]> QueryVectorAsync<TInput>(TInput searchValue, VectorPropertyModel property, CancellationToken cancellationToken)
    {
        float[] query;
        switch (searchValue)
        {
            case ReadOnlyMemory<float> memory: query = memory.ToArray(); break;
            case float[] array: query = array; break;
            case Embedding<float> embedding: query = embedding.Vector.ToArray(); break;
            default:
                if (property.EmbeddingGenerator is null)
                {
                    throw new NotSupportedException(VectorDataStrings.InvalidSearchInputAndNoEmbeddingGeneratorWasConfigured(searchValue!.GetType(), VectorKitModelBuilder.SupportedVectorTypes));
                }

                Embedding embedded = await property.GenerateEmbeddingAsync(searchValue!, cancellationToken).ConfigureAwait(false);
                query = embedded is Embedding<float> e
                    ? e.Vector.ToArray()
                    : throw new NotSupportedException($"The embedding generator of '{property.ModelName}' returned {embedded.GetType()}; VectorKit searches with Embedding<float>.");
                break;
        }

        if (query.Length != property.Dimensions)
        {
            throw new ArgumentException($"The search vector has {query.Length} dimensions; vector property '{property.ModelName}' has {property.Dimensions}.", nameof(searchValue));
        }

        return query;
    }

    private readonly struct ReadLockScope(ReaderWriterLockSlim lockSlim) : IDisposable
    {
        public void Dispose() => lockSlim.ExitReadLock();
    }
}
