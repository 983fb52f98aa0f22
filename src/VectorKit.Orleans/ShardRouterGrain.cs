using Microsoft.Extensions.Options;
using Orleans.Concurrency;
using VectorKit.Indexes;

namespace VectorKit.Orleans;

/// <summary>
/// The scatter–gather router (see <see cref="IShardRouterGrain"/>). Each shard is asked through one copy at a time,
/// starting at a rotating copy so reads spread over the replicas; a copy that fails or does not answer within its
/// share of the remaining time is skipped for the next one.
/// </summary>
/// <remarks>
/// <b>Exact merge.</b> Shards partition the ids, and each shard returns its k best by (distance, id), so the k best
/// of the union, by the same order, are the global k best: with exact shards the answer equals a single exact index
/// over all items, ties included.
/// </remarks>
[StatelessWorker]
[Reentrant]
internal sealed class ShardRouterGrain(CollectionDefinitions definitions, IOptions<VectorKitShardingOptions> options) : Grain, IShardRouterGrain
{
    private static int s_rotation;
    private readonly VectorKitShardingOptions _options = options.Value;

    public Task<bool> CreateCollectionAsync(ShardedCollectionDefinition definition)
    {
        ArgumentNullException.ThrowIfNull(definition);
        definition.Validate();
        return definitions.Store.CreateCollectionAsync(definition);
    }

    public Task<ShardedCollectionDefinition?> GetCollectionAsync(string name) => definitions.GetAsync(name);

    public async Task<RoutedSearchResult> SearchAsync(string collection, RoutedSearch search, CancellationToken cancellationToken = default)
    {
        ArgumentNullException.ThrowIfNull(search);
        ShardedCollectionDefinition definition = await definitions.GetAsync(collection, cancellationToken)
            ?? throw new ArgumentException($"There is no collection '{collection}'.", nameof(collection));
        Validate(definition, search);

        int[] shards = search.Filter?.Shards(definition.ShardCount) ?? Enumerable.Range(0, definition.ShardCount).ToArray();
        var query = new ShardQuery(search.Queries, search.QueryCount, search.K, search.SearchWidth, search.Filter);
        using var deadline = CancellationTokenSource.CreateLinkedTokenSource(cancellationToken);
        deadline.CancelAfter(search.Timeout);
        long deadlineTicks = Environment.TickCount64 + (long)search.Timeout.TotalMilliseconds;
        var answers = new Task<(ShardHits? Hits, string? Problem, bool Transient)>[shards.Length];
        int rotation = Interlocked.Increment(ref s_rotation);
        for (int i = 0; i < shards.Length; i++)
        {
            answers[i] = AskShardAsync(collection, definition.ReplicaCount, shards[i], rotation, query, deadlineTicks, deadline.Token);
        }

        await Task.WhenAll(answers);
        cancellationToken.ThrowIfCancellationRequested();

        var missing = new List<int>();
        var problems = new List<string>();
        bool allTransient = true;
        for (int i = 0; i < shards.Length; i++)
        {
            if (answers[i].Result.Hits is null)
            {
                missing.Add(shards[i]);
                problems.Add(answers[i].Result.Problem!);
                allTransient &= answers[i].Result.Transient;
            }
        }

        if (missing.Count > 0 && !search.AllowPartial)
        {
            throw new ShardUnavailableException(
                $"{missing.Count} of {shards.Length} shards of '{collection}' did not answer: " + string.Join("; ", missing.Select((s, i) => $"shard {s}: {problems[i]}")),
                [.. missing],
                allTransient);
        }

        return new RoutedSearchResult(Merge(answers, search.QueryCount, search.K), [.. missing], [.. problems]);
    }

    internal static SearchHit[][] Merge(Task<(ShardHits? Hits, string? Problem, bool Transient)>[] answers, int queryCount, int k)
    {
        var merged = new SearchHit[queryCount][];
        var pool = new List<SearchHit>();
        for (int q = 0; q < queryCount; q++)
        {
            pool.Clear();
            foreach (var answer in answers)
            {
                if (answer.Result.Hits is { } h)
                {
                    int kShard = h.Counts.Length == 0 ? 0 : h.Hits.Length / h.Counts.Length;
                    pool.AddRange(h.Hits.AsSpan(q * kShard, h.Counts[q]));
                }
            }

            pool.Sort(); // (distance, id): the library's result order
            merged[q] = pool.Count <= k ? [.. pool] : pool.GetRange(0, k).ToArray();
        }

        return merged;
    }

    private async Task<(ShardHits? Hits, string? Problem, bool Transient)> AskShardAsync(
        string collection, int replicas, int shard, int rotation, ShardQuery query, long deadlineTicks, CancellationToken deadline)
    {
        string problem = "no copy answered";
        bool transient = true;
        for (int attempt = 0; attempt < replicas; attempt++)
        {
            int replica = (int)((uint)(rotation + shard + attempt) % (uint)replicas);
            long remaining = deadlineTicks - Environment.TickCount64;
            if (remaining <= 0 || deadline.IsCancellationRequested)
            {
                return (null, $"no answer within the timeout ({problem})", true);
            }

            // Split what is left among the copies still to try, so one dead silo cannot use up the whole timeout.
            using var attemptLimit = CancellationTokenSource.CreateLinkedTokenSource(deadline);
            attemptLimit.CancelAfter(TimeSpan.FromMilliseconds(Math.Max(1, remaining / (replicas - attempt))));
            try
            {
                IShardGrain copy = GrainFactory.GetGrain<IShardGrain>(ShardKey.Format(collection, shard, replica));
                return (await copy.SearchAsync(query, attemptLimit.Token).WaitAsync(attemptLimit.Token), null, false);
            }
            catch (ShardUnavailableException e)
            {
                // A failed load is the more useful report: it stays, whatever the other copies say.
                problem = e.Message;
                transient = false;
                continue;
            }
            catch (ArgumentException)
            {
                throw;
            }
            catch (OperationCanceledException) when (transient)
            {
                problem = $"copy {replica} gave no answer in time";
            }
            catch (Exception e) when (transient && e is not (OutOfMemoryException or OperationCanceledException))
            {
                problem = $"copy {replica}: {e.GetType().Name}: {e.Message}";
            }
            catch (Exception e) when (e is not OutOfMemoryException)
            {
                // Keep the failed-load report of an earlier copy.
            }
        }

        return (null, problem, transient);
    }

    private void Validate(ShardedCollectionDefinition definition, RoutedSearch search)
    {
        if (search.QueryCount < 1 || search.QueryCount > _options.MaxQueriesPerSearch)
        {
            throw new ArgumentOutOfRangeException(nameof(search), search.QueryCount, $"QueryCount must be in [1, {_options.MaxQueriesPerSearch}].");
        }

        if (search.K < 1 || search.K > _options.MaxK)
        {
            throw new ArgumentOutOfRangeException(nameof(search), search.K, $"K must be in [1, {_options.MaxK}].");
        }

        if (search.SearchWidth is < 1)
        {
            throw new ArgumentOutOfRangeException(nameof(search), search.SearchWidth, "SearchWidth must be positive when given.");
        }

        if (search.Timeout <= TimeSpan.Zero)
        {
            throw new ArgumentOutOfRangeException(nameof(search), search.Timeout, "Timeout must be positive.");
        }

        VectorInput.CheckRows(search.Queries, search.QueryCount, definition.Dimension, "queries");
        search.Filter?.Validate();
    }
}
