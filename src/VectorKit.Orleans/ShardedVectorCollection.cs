using VectorKit.Indexes;

namespace VectorKit.Orleans;

/// <summary>
/// The client API of a sharded collection, usable from an Orleans client or from inside a silo (any
/// <see cref="IGrainFactory"/>): validated writes grouped by shard and sent to each shard's primary, searches through
/// the router grain, retries within <see cref="ShardedCollectionClientOptions.RetryWindow"/>.
/// </summary>
/// <remarks>
/// <para><b>Writes.</b> A write is checked whole (dimension, finite values, distinct ids) before anything is sent;
/// each shard's part is all or nothing and acknowledged only once in that shard's write-ahead log. A write over
/// several shards is not atomic across them: see <see cref="ShardWriteException"/>.</para>
/// <para><b>Thread safety.</b> All members are thread-safe.</para>
/// </remarks>
public sealed class ShardedVectorCollection
{
    private readonly IGrainFactory _grains;
    private readonly ShardedCollectionClientOptions _options;
    private int _rotation;

    private ShardedVectorCollection(IGrainFactory grains, ShardedCollectionDefinition definition, ShardedCollectionClientOptions options)
    {
        _grains = grains;
        Definition = definition;
        _options = options;
    }

    /// <summary>The collection's definition.</summary>
    public ShardedCollectionDefinition Definition { get; }

    /// <summary>Creates the collection (or opens it when an equal definition exists).</summary>
    /// <param name="grains">The cluster's grain factory.</param>
    /// <param name="definition">The definition.</param>
    /// <param name="options">Retry settings; <see langword="null"/> for the defaults.</param>
    /// <returns>The collection.</returns>
    /// <exception cref="ArgumentException">The definition is invalid.</exception>
    /// <exception cref="InvalidOperationException">A different definition exists under the same name.</exception>
    public static async Task<ShardedVectorCollection> CreateAsync(IGrainFactory grains, ShardedCollectionDefinition definition, ShardedCollectionClientOptions? options = null)
    {
        ArgumentNullException.ThrowIfNull(grains);
        ArgumentNullException.ThrowIfNull(definition);
        definition.Validate();
        await grains.GetGrain<IShardRouterGrain>(0).CreateCollectionAsync(definition);
        return new ShardedVectorCollection(grains, definition, options ?? ShardedCollectionClientOptions.Default);
    }

    /// <summary>Opens an existing collection.</summary>
    /// <param name="grains">The cluster's grain factory.</param>
    /// <param name="name">The collection name.</param>
    /// <param name="options">Retry settings; <see langword="null"/> for the defaults.</param>
    /// <returns>The collection.</returns>
    /// <exception cref="ArgumentException">There is no such collection.</exception>
    public static async Task<ShardedVectorCollection> OpenAsync(IGrainFactory grains, string name, ShardedCollectionClientOptions? options = null)
    {
        ArgumentNullException.ThrowIfNull(grains);
        ShardedCollectionDefinition definition = await grains.GetGrain<IShardRouterGrain>(0).GetCollectionAsync(name)
            ?? throw new ArgumentException($"There is no collection '{name}'.", nameof(name));
        return new ShardedVectorCollection(grains, definition, options ?? ShardedCollectionClientOptions.Default);
    }

    /// <summary>Adds or replaces items.</summary>
    /// <param name="ids">Distinct ids.</param>
    /// <param name="vectors">Their vectors, row by row.</param>
    /// <param name="cancellationToken">Stops retrying; parts already acknowledged stay written.</param>
    /// <returns>One acknowledgement per shard written, by shard.</returns>
    /// <exception cref="ArgumentException">Wrong length, a non-finite value, or a repeated id; nothing was sent.</exception>
    /// <exception cref="ShardWriteException">Some shards did not acknowledge within the retry window.</exception>
    /// <exception cref="ShardUnavailableException">A shard failed to load and needs repair (the write is not retried).</exception>
    public Task<ShardWriteAck[]> UpsertAsync(ReadOnlyMemory<long> ids, ReadOnlyMemory<float> vectors, CancellationToken cancellationToken = default)
    {
        VectorInput.CheckRows(vectors.Span, ids.Length, Definition.Dimension, nameof(vectors));
        VectorInput.CheckDistinct(ids.Span, nameof(ids));
        (int Shard, long[] Ids, float[] Vectors)[] parts = Split(ids.Span, vectors.Span);
        return WriteAsync(parts, (grain, part, token) => grain.UpsertAsync(part.Ids, part.Vectors, token), cancellationToken);
    }

    /// <summary>Removes items (ids not present are ignored).</summary>
    /// <param name="ids">Distinct ids.</param>
    /// <param name="cancellationToken">Stops retrying.</param>
    /// <returns>One acknowledgement per shard written.</returns>
    /// <exception cref="ArgumentException">A repeated id.</exception>
    /// <exception cref="ShardWriteException">Some shards did not acknowledge within the retry window.</exception>
    /// <exception cref="ShardUnavailableException">A shard failed to load and needs repair.</exception>
    public Task<ShardWriteAck[]> RemoveAsync(ReadOnlyMemory<long> ids, CancellationToken cancellationToken = default)
    {
        VectorInput.CheckDistinct(ids.Span, nameof(ids));
        (int Shard, long[] Ids, float[] Vectors)[] parts = Split(ids.Span, default);
        return WriteAsync(parts, (grain, part, token) => grain.RemoveAsync(part.Ids, token), cancellationToken);
    }

    /// <summary>Searches every shard (or those the filter allows) and merges their top k.</summary>
    /// <param name="query">The query vector.</param>
    /// <param name="k">Hits wanted.</param>
    /// <param name="options">Settings; <see langword="null"/> for <see cref="ShardedSearchOptions.Default"/>.</param>
    /// <param name="cancellationToken">Cancels the search on every shard.</param>
    /// <returns>The hits, best first (ties by ascending id), flagged when partial.</returns>
    /// <exception cref="ArgumentException">Wrong dimension, a non-finite value, k out of range, or a bad filter.</exception>
    /// <exception cref="ShardUnavailableException">A shard did not answer (retried within the window when transient) and partial answers were not allowed.</exception>
    public async Task<(SearchHit[] Hits, RoutedSearchResult Result)> SearchAsync(ReadOnlyMemory<float> query, int k, ShardedSearchOptions? options = null, CancellationToken cancellationToken = default)
    {
        RoutedSearchResult result = await SearchBatchAsync(query, 1, k, options, cancellationToken);
        return (result.Hits[0], result);
    }

    /// <summary>Searches many queries in one routed call (one batch per shard).</summary>
    /// <param name="queries">The queries, row by row.</param>
    /// <param name="queryCount">How many queries.</param>
    /// <param name="k">Hits wanted per query.</param>
    /// <param name="options">Settings; <see langword="null"/> for the defaults.</param>
    /// <param name="cancellationToken">Cancels the search.</param>
    /// <returns>Per query the merged hits; flagged when partial.</returns>
    /// <exception cref="ArgumentException">Wrong length, a non-finite value, k out of range, or a bad filter.</exception>
    /// <exception cref="ShardUnavailableException">A shard did not answer and partial answers were not allowed.</exception>
    public async Task<RoutedSearchResult> SearchBatchAsync(ReadOnlyMemory<float> queries, int queryCount, int k, ShardedSearchOptions? options = null, CancellationToken cancellationToken = default)
    {
        options ??= ShardedSearchOptions.Default;
        ArgumentOutOfRangeException.ThrowIfNegativeOrZero(k);
        ArgumentOutOfRangeException.ThrowIfNegativeOrZero(queryCount);
        VectorInput.CheckRows(queries.Span, queryCount, Definition.Dimension, nameof(queries));
        options.Filter?.Validate();
        var search = new RoutedSearch
        {
            Queries = queries.ToArray(),
            QueryCount = queryCount,
            K = k,
            SearchWidth = options.SearchWidth,
            Filter = options.Filter,
            Timeout = options.Timeout,
            AllowPartial = options.AllowPartial,
        };
        IShardRouterGrain router = _grains.GetGrain<IShardRouterGrain>(0);
        return await RetryAsync(
            token => router.SearchAsync(Definition.Name, search, token),
            e => !options.AllowPartial && IsTransient(e),
            cancellationToken);
    }

    /// <summary>Reads an item's stored vector from the first copy of its shard that answers (primary first).</summary>
    /// <param name="id">The id.</param>
    /// <param name="cancellationToken">Stops retrying.</param>
    /// <returns>The vector, or <see langword="null"/> when the item is absent.</returns>
    public Task<float[]?> GetVectorAsync(long id, CancellationToken cancellationToken = default)
    {
        int shard = ShardHash.ShardOf(id, Definition.ShardCount);
        return RetryAsync(
            async token =>
            {
                Exception? last = null;
                for (int r = 0; r < Definition.ReplicaCount; r++)
                {
                    try
                    {
                        return await Copy(shard, r).GetVectorAsync(id).WaitAsync(_options.AttemptTimeout, token);
                    }
                    catch (Exception e) when (IsTransient(e) || e is ShardUnavailableException)
                    {
                        last = e;
                    }
                }

                throw last!;
            },
            IsTransient,
            cancellationToken);
    }

    /// <summary>The number of items: the sum over shards, each counted on its primary.</summary>
    /// <param name="cancellationToken">Stops retrying.</param>
    /// <returns>The count.</returns>
    public async Task<long> CountAsync(CancellationToken cancellationToken = default)
    {
        ShardStatus[] status = await Task.WhenAll(Enumerable.Range(0, Definition.ShardCount)
            .Select(s => RetryAsync(token => Copy(s, 0).GetStatusAsync().WaitAsync(_options.AttemptTimeout, token), IsTransient, cancellationToken)));
        return status.Sum(s => (long)s.Count);
    }

    /// <summary>Every id in the collection, from each shard's primary.</summary>
    /// <param name="cancellationToken">Stops retrying.</param>
    /// <returns>The ids, ascending.</returns>
    public async Task<long[]> GetIdsAsync(CancellationToken cancellationToken = default)
    {
        long[][] parts = await Task.WhenAll(Enumerable.Range(0, Definition.ShardCount)
            .Select(s => RetryAsync(token => Copy(s, 0).GetIdsAsync().WaitAsync(_options.AttemptTimeout, token), IsTransient, cancellationToken)));
        long[] all = [.. parts.SelectMany(p => p)];
        Array.Sort(all);
        return all;
    }

    /// <summary>The state of every copy of every shard (a copy that does not answer in time is reported unavailable).</summary>
    /// <param name="timeout">How long to wait for each copy.</param>
    /// <returns>Shard by shard, copy by copy.</returns>
    public async Task<ShardStatus[]> GetStatusAsync(TimeSpan timeout)
    {
        var tasks = new List<Task<ShardStatus>>();
        for (int s = 0; s < Definition.ShardCount; s++)
        {
            for (int r = 0; r < Definition.ReplicaCount; r++)
            {
                int shard = s, replica = r;
                tasks.Add(Task.Run(async () =>
                {
                    try
                    {
                        return await Copy(shard, replica).GetStatusAsync().WaitAsync(timeout);
                    }
                    catch (Exception e) when (e is not OutOfMemoryException)
                    {
                        return new ShardStatus(shard, replica, false, $"no answer: {e.GetType().Name}: {e.Message}", 0, 0, "");
                    }
                }));
            }
        }

        return await Task.WhenAll(tasks);
    }

    /// <summary>Makes every copy of a shard drop its state and load it again from the store (after its files were repaired).</summary>
    /// <param name="shard">The shard.</param>
    /// <returns>A task that completes when every copy was told.</returns>
    public async Task ResetShardAsync(int shard)
    {
        ArgumentOutOfRangeException.ThrowIfNegative(shard);
        ArgumentOutOfRangeException.ThrowIfGreaterThanOrEqual(shard, Definition.ShardCount);
        for (int r = 0; r < Definition.ReplicaCount; r++)
        {
            await Copy(shard, r).ResetAsync();
        }
    }

    /// <summary>A read-only <see cref="IVectorIndex"/> over the collection, for code written against one index (the re-ranking pipeline).</summary>
    /// <param name="options">Search settings used by the view's searches.</param>
    /// <returns>The view.</returns>
    public ShardedIndexView AsIndexView(ShardedSearchOptions? options = null) => new(this, options ?? ShardedSearchOptions.Default);

    internal static bool IsTransient(Exception e) => e switch
    {
        ShardUnavailableException u => u.IsTransient,
        ArgumentException or InvalidOperationException or NotSupportedException or OperationCanceledException => false,
        ShardWriteException => false,
        _ => true, // Orleans's own failures: silo unavailable, message rejected, timeouts, connection failures
    };

    private IShardGrain Copy(int shard, int replica) => _grains.GetGrain<IShardGrain>(ShardKey.Format(Definition.Name, shard, replica));

    private (int Shard, long[] Ids, float[] Vectors)[] Split(ReadOnlySpan<long> ids, ReadOnlySpan<float> vectors)
    {
        int s = Definition.ShardCount, d = Definition.Dimension;
        var counts = new int[s];
        var owner = new int[ids.Length];
        for (int i = 0; i < ids.Length; i++)
        {
            owner[i] = ShardHash.ShardOf(ids[i], s);
            counts[owner[i]]++;
        }

        var parts = new List<(int, long[], float[])>();
        var slot = new int[s];
        var partIds = new long[s][];
        var partVectors = new float[s][];
        for (int shard = 0; shard < s; shard++)
        {
            if (counts[shard] > 0)
            {
                partIds[shard] = new long[counts[shard]];
                partVectors[shard] = vectors.IsEmpty ? [] : new float[counts[shard] * d];
                parts.Add((shard, partIds[shard], partVectors[shard]));
            }
        }

        for (int i = 0; i < ids.Length; i++)
        {
            int shard = owner[i], at = slot[shard]++;
            partIds[shard][at] = ids[i];
            if (!vectors.IsEmpty)
            {
                vectors.Slice(i * d, d).CopyTo(partVectors[shard].AsSpan(at * d));
            }
        }

        return [.. parts];
    }

    private async Task<ShardWriteAck[]> WriteAsync(
        (int Shard, long[] Ids, float[] Vectors)[] parts,
        Func<IShardGrain, (int Shard, long[] Ids, float[] Vectors), CancellationToken, Task<ShardWriteAck>> send,
        CancellationToken cancellationToken)
    {
        var tasks = new Task<ShardWriteAck>[parts.Length];
        for (int i = 0; i < parts.Length; i++)
        {
            var part = parts[i];
            tasks[i] = RetryAsync(
                async token =>
                {
                    using var attempt = CancellationTokenSource.CreateLinkedTokenSource(token);
                    attempt.CancelAfter(_options.AttemptTimeout);
                    try
                    {
                        return await send(Copy(part.Shard, 0), part, attempt.Token).WaitAsync(attempt.Token);
                    }
                    catch (OperationCanceledException e) when (!token.IsCancellationRequested)
                    {
                        throw new TimeoutException($"Shard {part.Shard} did not acknowledge within {_options.AttemptTimeout}.", e);
                    }
                },
                IsTransient,
                cancellationToken);
        }

        try
        {
            return await Task.WhenAll(tasks);
        }
        catch (Exception) when (tasks.Any(t => t.IsCompletedSuccessfully) && tasks.Any(t => !t.IsCompletedSuccessfully))
        {
            int[] done = [.. parts.Where((_, i) => tasks[i].IsCompletedSuccessfully).Select(p => p.Shard)];
            int[] failed = [.. parts.Where((_, i) => !tasks[i].IsCompletedSuccessfully).Select(p => p.Shard)];
            Exception last = tasks.First(t => t.IsFaulted || t.IsCanceled).Exception?.InnerException ?? new OperationCanceledException();
            throw new ShardWriteException(
                $"The write reached {done.Length} of {parts.Length} shards; shards {string.Join(", ", failed)} did not acknowledge: {last.Message}", done, failed, last);
        }
    }

    private async Task<T> RetryAsync<T>(Func<CancellationToken, Task<T>> attempt, Func<Exception, bool> retry, CancellationToken cancellationToken)
    {
        long deadline = Environment.TickCount64 + (long)_options.RetryWindow.TotalMilliseconds;
        TimeSpan pause = _options.FirstBackoff;
        while (true)
        {
            try
            {
                return await attempt(cancellationToken);
            }
            catch (Exception e) when (retry(e) && !cancellationToken.IsCancellationRequested && Environment.TickCount64 + pause.TotalMilliseconds < deadline)
            {
                await Task.Delay(pause + TimeSpan.FromMilliseconds(Interlocked.Increment(ref _rotation) % 17), cancellationToken);
                pause = TimeSpan.FromTicks(Math.Min(pause.Ticks * 2, TimeSpan.TicksPerSecond));
            }
        }
    }
}
