using System.Runtime.ExceptionServices;
using VectorKit.Distance;
using VectorKit.Internal;

namespace VectorKit.Indexes;

/// <summary>Searches one prepared query (validated, unit length under cosine) into its result slots; returns how many it wrote.</summary>
internal delegate int QuerySearch<TScratch>(ReadOnlySpan<float> query, Span<SearchHit> destination, TScratch scratch);

/// <summary>Searches queries [first, first + count) of a pinned, prepared batch into their result slots.</summary>
internal delegate void BlockSearch<TScratch>(nint queries, int first, int count, TScratch scratch);

/// <summary>
/// The batch driver every index kind runs its <see cref="IVectorIndex.SearchBatch"/> through: input checks, k capped at
/// the item count, blocks of queries in parallel with one scratch per worker, each query (or each block, for a kind
/// that scores a block together) under the index's read lock, released in between so a writer waits for the queries in
/// flight rather than the whole batch; progress outside the lock, cancellation between blocks, and a failure inside a
/// block rethrown as itself rather than wrapped.
/// </summary>
internal static unsafe class BatchSearch
{
    /// <summary>
    /// The checks every batch starts with (k positive, whole rows, finite components; see
    /// <see cref="VectorChecks.CheckBatchQueries"/>): returns the queries as the index searches them (unit rows under
    /// cosine, a new array; else the caller's rows).
    /// </summary>
    public static ReadOnlySpan<float> Prepare(ReadOnlySpan<float> queries, int k, int dimension, DistanceMetric metric, out int queryCount)
    {
        float[]? unit = VectorChecks.CheckBatchQueries(queries, k, dimension, metric, out queryCount);
        return unit is null ? queries : unit;
    }

    /// <summary>Results for <paramref name="queryCount"/> queries, with k capped at the items there are (at least 1 slot).</summary>
    public static BatchSearchResults CreateResults(int queryCount, int k, int itemCount)
        => new(queryCount, Math.Min(k, Math.Max(1, itemCount)));

    /// <summary>
    /// Runs <paramref name="search"/> for every query, blocks of <paramref name="blockSize"/> queries in parallel, each
    /// query under the read lock: a writer that arrives waits for one query per worker, before it queues for the lock
    /// (see IndexLock), so single searches do not wait behind it for batch queries.
    /// </summary>
    public static void RunQueries<TScratch>(
        VectorIndex index,
        ReadOnlySpan<float> queries,
        int dimension,
        BatchSearchResults results,
        int blockSize,
        SearchOptions options,
        IProgress<int>? progress,
        CancellationToken cancellationToken,
        Func<TScratch> createScratch,
        QuerySearch<TScratch> search)
    {
        Run(index, queries, results.QueryCount, blockSize, lockEachBlock: false, options, progress, cancellationToken, createScratch, (address, first, count, scratch) =>
        {
            for (int i = first; i < first + count; i++)
            {
                var query = new ReadOnlySpan<float>((float*)address + ((nint)i * dimension), dimension);
                using (index.EnterSearchBlock())
                {
                    results.SetCount(i, search(query, results.Slots(i), scratch));
                }
            }
        });
    }

    /// <summary>
    /// Runs <paramref name="search"/> over blocks of queries in parallel, the queries pinned for the whole run; each block
    /// runs under <paramref name="index"/>'s read lock, taken and released by the worker that runs it.
    /// </summary>
    public static void RunBlocks<TScratch>(
        VectorIndex index,
        ReadOnlySpan<float> queries,
        int queryCount,
        int blockSize,
        SearchOptions options,
        IProgress<int>? progress,
        CancellationToken cancellationToken,
        Func<TScratch> createScratch,
        BlockSearch<TScratch> search)
        => Run(index, queries, queryCount, blockSize, lockEachBlock: true, options, progress, cancellationToken, createScratch, search);

    // Blocks in parallel, each under the read lock when `lockEachBlock`; otherwise the block takes it itself.
    private static void Run<TScratch>(
        VectorIndex index,
        ReadOnlySpan<float> queries,
        int queryCount,
        int blockSize,
        bool lockEachBlock,
        SearchOptions options,
        IProgress<int>? progress,
        CancellationToken cancellationToken,
        Func<TScratch> createScratch,
        BlockSearch<TScratch> search)
    {
        cancellationToken.ThrowIfCancellationRequested();
        if (queryCount == 0)
        {
            return;
        }

        int blocks = (queryCount + blockSize - 1) / blockSize;
        int completed = 0;
        var parallel = new ParallelOptions { MaxDegreeOfParallelism = options.EffectiveParallelism, CancellationToken = cancellationToken };
        fixed (float* pinned = queries)
        {
            nint address = (nint)pinned;
            try
            {
                Parallel.For(0, blocks, parallel, createScratch, (b, _, scratch) =>
                {
                    int first = b * blockSize;
                    int count = Math.Min(blockSize, queryCount - first);
                    if (lockEachBlock)
                    {
                        using (index.EnterSearchBlock())
                        {
                            search(address, first, count, scratch);
                        }
                    }
                    else
                    {
                        search(address, first, count, scratch);
                    }

                    progress?.Report(Interlocked.Add(ref completed, count));
                    return scratch;
                }, static _ => { });
            }
            catch (AggregateException e) when (e.InnerExceptions.Count == 1)
            {
                // A filter or a source that throws reaches the caller as itself, as in a single search.
                ExceptionDispatchInfo.Throw(e.InnerExceptions[0]);
            }
        }
    }
}
