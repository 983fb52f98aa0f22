using VectorKit.Distance;
using VectorKit.Distance.Kernels;
using VectorKit.Internal;

namespace VectorKit.Indexes;

/// <summary>
/// The core every built-in index kind (exact, graph, inverted file) stands on: the lock, the id map, disposal, input
/// checks and query preparation, the batch driver, and attaching an external full-vector source. A kind supplies its
/// storage and its search; the members here behave the same on every kind.
/// </summary>
/// <remarks>
/// <para><b>Thread safety.</b> All members are thread-safe. Any number of searches run concurrently; writes take the
/// index's write lock, so a search sees each write entirely or not at all (each kind documents any step it runs beside
/// searches). A batch search takes the read lock once per query (per tile of queries on the exact index's float32 path), not for its whole run: each query sees one
/// consistent state of the index, but different queries of one batch may see different states when a write lands
/// between them, and a writer waits for at most the queries or tiles in flight, before it queues for the lock, so single
/// searches do not wait behind it for batch queries. Saving and the long read-only phases of
/// maintenance (a compaction's copy, the graph's global reachability pass) hold only the writer gate: searches run
/// beside them, writes wait for them. The graph's compaction rebuilds beside writes as well (see its documentation).</para>
/// <para><b>Disposal.</b> After <see cref="Dispose"/>, every member but <see cref="Dimension"/>, <see cref="Metric"/>,
/// <see cref="IVectorIndex.Options"/>, <see cref="CodeBytesPerVector"/> and <see cref="Dispose"/> throws
/// <see cref="ObjectDisposedException"/>.</para>
/// <para>Only the library derives from this class.</para>
/// </remarks>
public abstract class VectorIndex : ITrainableIndex, IExternalFullVectors
{
    // Queries of a batch handed to one worker at a time, unless a kind batches otherwise.
    private protected const int QueryBlock = 16;

    // Batch queries take it through EnterSearchBlock, as readers that give way to arriving writers (see IndexLock).
    private protected readonly IndexLock _lock = new();

    // Taken before _lock, never after it. Every write passes it shared (writers still exclude one another through
    // _lock as before); a save and the long read-only phases of maintenance hold it exclusively, so the state they read
    // stays still without _lock. Searches never touch it, so none queues behind them (a writer waiting on _lock would
    // hold back new readers, which is why such phases must not sit on _lock while writers can arrive).
    private protected readonly ReaderWriterLockSlim _writerGate = new(LockRecursionPolicy.NoRecursion);
    private protected IdMap _slotOf = new();
    private protected IFullVectorSource? _source;
    private protected int _count;

    // Set while a compaction rebuilds a copy beside writes: every write is recorded here, under the write lock, at the
    // point it becomes visible, for the copy to replay before the swap.
    private protected ChangeLog? _changeLog;
    private volatile bool _disposed;
    private volatile TunedSearchDefaults? _tuned;
    private long _changesSinceTuning;

    private protected VectorIndex(int dimension, DistanceMetric metric)
    {
        if (dimension <= 0)
        {
            ThrowHelper.ThrowArgumentOutOfRange(nameof(dimension), dimension, "must be positive");
        }

        VectorChecks.CheckMetric(metric);
        Dimension = dimension;
        Metric = metric;
    }

    /// <inheritdoc/>
    public int Dimension { get; }

    /// <inheritdoc/>
    public DistanceMetric Metric { get; }

    /// <inheritdoc/>
    VectorIndexOptions IVectorIndex.Options => SharedOptions;

    /// <inheritdoc/>
    public int Count
    {
        get
        {
            ThrowIfDisposed();
            return Volatile.Read(ref _count);
        }
    }

    /// <inheritdoc/>
    public long MemoryBytes
    {
        get
        {
            using var read = _lock.EnterRead();
            ThrowIfDisposed();
            return MemoryBytesLocked();
        }
    }

    /// <inheritdoc/>
    public abstract int CodeBytesPerVector { get; }

    /// <inheritdoc/>
    public abstract bool IsTrained { get; }

    /// <summary>
    /// Whether full float32 vectors are kept in the index's memory beside compressed codes for exact re-scoring (a
    /// compressed <see cref="VectorIndexOptions.Encoding"/>, a positive <see cref="VectorIndexOptions.RescoreDepth"/> and
    /// <see cref="VectorIndexOptions.FullVectors"/> = <see cref="FullVectorLocation.InIndexMemory"/>). Under float32 the
    /// stored rows are the full vectors and this is <see langword="false"/>.
    /// </summary>
    public bool KeepsFullVectors => SharedOptions.KeepsFullVectorsInMemory;

    /// <inheritdoc/>
    public bool ReadsFullVectorsExternally => SharedOptions.ReadsFullVectorsExternally;

    /// <inheritdoc/>
    public IFullVectorSource? FullVectorSource => Volatile.Read(ref _source);

    /// <summary>
    /// The search settings used when a call's <see cref="SearchOptions"/> leaves them unset, in place of the options'
    /// own; <see langword="null"/> until <see cref="ApplyTunedDefaults"/> sets them (as the recall tuning does). Saved
    /// with the index.
    /// </summary>
    public TunedSearchDefaults? TunedDefaults
    {
        get
        {
            ThrowIfDisposed();
            return _tuned;
        }
    }

    /// <summary>
    /// Items added, replaced or removed since <see cref="ApplyTunedDefaults"/> last ran (when it never ran: since the
    /// index was created or loaded); saved with tuned defaults. A cheap staleness signal: once it is a sizeable part of <see cref="Count"/>, check
    /// the recall at the defaults again (<c>VectorKit.Tuning.RecallTuning.Check</c>) and re-tune when it falls short.
    /// </summary>
    public long ChangesSinceTuning
    {
        get
        {
            ThrowIfDisposed();
            return Interlocked.Read(ref _changesSinceTuning);
        }
    }

    /// <summary>
    /// Makes <paramref name="defaults"/> the search settings used when a call leaves them unset (a call's
    /// <see cref="SearchOptions.SearchWidth"/> and <see cref="SearchOptions.RescoreDepth"/> still win), and restarts
    /// <see cref="ChangesSinceTuning"/> at 0. <see langword="null"/> returns to the options' own settings.
    /// </summary>
    /// <param name="defaults">The settings, or <see langword="null"/>.</param>
    /// <exception cref="ArgumentException">The settings name a width on an index without one (the exact index), a width above the kind's largest (the inverted file's list count), or a re-scoring depth on an index that keeps no full vectors.</exception>
    public void ApplyTunedDefaults(TunedSearchDefaults? defaults)
    {
        using var gate = _writerGate.EnterRead();
        using var write = _lock.EnterWrite();
        ThrowIfDisposed();
        CheckDefaults(defaults);
        _tuned = defaults;
        Interlocked.Exchange(ref _changesSinceTuning, 0);
    }

    /// <summary>Restores saved defaults and change count on a freshly loaded index (checked as <see cref="ApplyTunedDefaults"/> checks).</summary>
    internal void RestoreTuning(TunedSearchDefaults? defaults, long changesSinceTuning)
    {
        CheckDefaults(defaults);
        _tuned = defaults;
        _changesSinceTuning = changesSinceTuning;
    }

    /// <summary>The settings the shared tuning may vary on this index.</summary>
    internal SearchKnobs Knobs => KnobsOf(SharedOptions);

    /// <summary>The kind's search width: its largest useful value and the options' default (none on the exact index).</summary>
    private protected virtual (int Max, int Default, bool CoversDepth) WidthKnob => (0, 0, false);

    private SearchKnobs KnobsOf(VectorIndexOptions options)
    {
        (int max, int width, bool covers) = WidthKnob;
        return new SearchKnobs(max, width, covers, options.Rescores, options.RescoreDepth);
    }

    private void CheckDefaults(TunedSearchDefaults? defaults)
    {
        if (defaults is null)
        {
            return;
        }

        SearchKnobs knobs = Knobs;
        if (defaults.SearchWidth is { } width && width > knobs.MaxWidth)
        {
            ThrowHelper.ThrowArgument(
                nameof(defaults),
                knobs.MaxWidth == 0
                    ? $"{GetType().Name} has no search width, yet the defaults set it to {width}."
                    : $"The default search width {width} exceeds this index's largest, {knobs.MaxWidth}.");
        }

        if (defaults.RescoreDepth is { } depth && !knobs.Rescores)
        {
            ThrowHelper.ThrowArgument(nameof(defaults), $"The index keeps no full vectors to re-score with, yet the defaults set a re-scoring depth of {depth}.");
        }
    }

    /// <summary>The kind's options, for the shared members.</summary>
    private protected abstract VectorIndexOptions SharedOptions { get; }

    /// <summary>What a caller must do before adding to or searching an untrained index of this kind.</summary>
    private protected abstract string NotTrainedMessage { get; }

    /// <inheritdoc/>
    public void AttachFullVectors(IFullVectorSource source)
    {
        SourceRows.CheckAttach(source, Dimension, ReadsFullVectorsExternally);
        using var gate = _writerGate.EnterRead();
        using var write = _lock.EnterWrite();
        ThrowIfDisposed();
        Volatile.Write(ref _source, source);
    }

    /// <inheritdoc/>
    public abstract void Train(ReadOnlySpan<float> sample, IProgress<IndexTrainingProgress>? progress = null, CancellationToken cancellationToken = default);

    /// <inheritdoc/>
    public bool Contains(long id)
    {
        using var read = _lock.EnterRead();
        ThrowIfDisposed();
        return _slotOf.ContainsKey(id);
    }

    /// <inheritdoc/>
    public long[] GetIds()
    {
        using var read = _lock.EnterRead();
        ThrowIfDisposed();
        return _slotOf.SortedIds();
    }

    /// <inheritdoc/>
    /// <remarks>
    /// Under cosine the stored vector is the unit-length one. Under a compressed encoding without full vectors this is
    /// the decoded code, an approximation of the vector added. With an attached external source it is the source's
    /// vector (unit length under cosine, as an index keeping it stores it).
    /// </remarks>
    /// <exception cref="InvalidOperationException">The attached source lacks the vector of an id the index holds.</exception>
    public bool TryGetVector(long id, Span<float> destination)
    {
        VectorChecks.CheckVectorDestination(destination, Dimension);
        using var read = _lock.EnterRead();
        ThrowIfDisposed();
        if (!_slotOf.TryGetValue(id, out int slot))
        {
            return false;
        }

        if (_source is { } source)
        {
            // Attached only when the full vectors live outside the index.
            new SourceRows(source, Dimension, Metric == DistanceMetric.Cosine).CopyTo(id, destination);
        }
        else
        {
            CopyStoredLocked(slot, destination);
        }

        return true;
    }

    /// <inheritdoc/>
    /// <exception cref="IndexNotTrainedException">The index needs training and has not been trained.</exception>
    public void Add(long id, ReadOnlySpan<float> vector)
    {
        VectorChecks.CheckForAdd(vector, Dimension, Metric);
        AddRange([id], vector);
    }

    /// <inheritdoc/>
    /// <exception cref="IndexNotTrainedException">The index needs training and has not been trained.</exception>
    public void AddRange(ReadOnlySpan<long> ids, ReadOnlySpan<float> vectors, IProgress<int>? progress = null, CancellationToken cancellationToken = default)
    {
        VectorChecks.CheckBatchForAdd(ids, vectors, Dimension, Metric);
        cancellationToken.ThrowIfCancellationRequested();
        if (!ids.IsEmpty)
        {
            try
            {
                using var gate = EnterGateWithRoom(ids.Length);
                WriteBatch(ids, vectors, replace: false, progress, cancellationToken);
                Interlocked.Add(ref _changesSinceTuning, ids.Length);
            }
            finally
            {
                // A cancelled add's roll-back can make maintenance due too.
                AfterWrite();
            }
        }
    }

    /// <inheritdoc/>
    /// <exception cref="IndexNotTrainedException">The index needs training and has not been trained.</exception>
    public bool AddOrReplace(long id, ReadOnlySpan<float> vector)
    {
        VectorChecks.CheckForAdd(vector, Dimension, Metric);
        return AddOrReplaceRange([id], vector) == 1;
    }

    /// <inheritdoc/>
    /// <exception cref="IndexNotTrainedException">The index needs training and has not been trained.</exception>
    public int AddOrReplaceRange(ReadOnlySpan<long> ids, ReadOnlySpan<float> vectors, IProgress<int>? progress = null, CancellationToken cancellationToken = default)
    {
        VectorChecks.CheckBatchForAdd(ids, vectors, Dimension, Metric);
        cancellationToken.ThrowIfCancellationRequested();
        if (ids.IsEmpty)
        {
            return 0;
        }

        try
        {
            using var gate = EnterGateWithRoom(ids.Length);
            int replaced = WriteBatch(ids, vectors, replace: true, progress, cancellationToken);
            Interlocked.Add(ref _changesSinceTuning, ids.Length);
            return replaced;
        }
        finally
        {
            AfterWrite();
        }
    }

    /// <inheritdoc/>
    public void Remove(long id) => RemoveRange([id]);

    /// <inheritdoc/>
    public void RemoveRange(ReadOnlySpan<long> ids)
    {
        VectorChecks.CheckUniqueIds(ids);
        if (ids.IsEmpty)
        {
            return;
        }

        using (_writerGate.EnterRead())
        using (_lock.EnterWrite())
        {
            ThrowIfDisposed();
            ThrowIfReadOnly();
            _slotOf.CheckPresent(ids);
            _changeLog?.RecordRemove(ids);
            RemoveLocked(ids);
            Interlocked.Add(ref _changesSinceTuning, ids.Length);
        }

        AfterWrite();
    }

    /// <inheritdoc/>
    public abstract void Compact(IProgress<int>? progress = null, CancellationToken cancellationToken = default);

    /// <inheritdoc/>
    /// <exception cref="IndexNotTrainedException">The index needs training and has not been trained.</exception>
    /// <exception cref="InvalidOperationException">Re-scoring reads an external source and none is attached, or the source lacks a candidate's vector.</exception>
    public int Search(ReadOnlySpan<float> query, Span<SearchHit> destination, SearchOptions? options = null)
    {
        VectorChecks.CheckResultDestination(destination);
        using var unit = ScratchRental<float>.Rent(Metric == DistanceMetric.Cosine ? Dimension : 0);
        ReadOnlySpan<float> q = VectorChecks.PrepareQuery(query, Dimension, Metric, unit.Span);
        using var read = _lock.EnterRead();
        ThrowIfDisposed();
        ThrowIfNotTrained();
        return _count == 0 ? 0 : SearchLocked(q, destination, options ?? SearchOptions.Default);
    }

    // The array form of Search: sized by the count under the same read lock as the search, so it holds every hit the
    // search can return and never more than the index holds.
    internal SearchHit[] SearchToArray(ReadOnlySpan<float> query, int k, SearchOptions? options)
    {
        using var unit = ScratchRental<float>.Rent(Metric == DistanceMetric.Cosine ? Dimension : 0);
        ReadOnlySpan<float> q = VectorChecks.PrepareQuery(query, Dimension, Metric, unit.Span);
        using var read = _lock.EnterRead();
        ThrowIfDisposed();
        ThrowIfNotTrained();
        if (_count == 0)
        {
            return [];
        }

        var hits = new SearchHit[Math.Min(k, _count)];
        int written = SearchLocked(q, hits, options ?? SearchOptions.Default);
        return written == hits.Length ? hits : hits.AsSpan(0, written).ToArray();
    }

    /// <inheritdoc/>
    /// <remarks>
    /// Blocks of queries run in parallel; each query takes the read lock on its own (the exact index's float32 path,
    /// which scores a tile of queries together, takes it per tile), released in between: a write waits for at most the
    /// queries or tiles in flight, never for the whole batch, and no new one starts while it waits; single searches do
    /// not queue behind a write that waits for batch queries. Each query therefore sees one consistent state of the
    /// index, but two queries of one batch may see different states when a write lands between them (k is capped at
    /// the item count when the batch starts). <paramref name="progress"/> is called outside the lock.
    /// </remarks>
    /// <exception cref="IndexNotTrainedException">The index needs training and has not been trained.</exception>
    /// <exception cref="InvalidOperationException">Re-scoring reads an external source and none is attached, or the source lacks a candidate's vector.</exception>
    /// <exception cref="ObjectDisposedException">The index was disposed, before or during the batch.</exception>
    public BatchSearchResults SearchBatch(
        ReadOnlySpan<float> queries,
        int k,
        SearchOptions? options = null,
        IProgress<int>? progress = null,
        CancellationToken cancellationToken = default)
    {
        ReadOnlySpan<float> prepared = BatchSearch.Prepare(queries, k, Dimension, Metric, out int queryCount);
        SearchOptions run = options ?? SearchOptions.Default;
        BatchSearchResults results;
        using (_lock.EnterRead())
        {
            // Checked once: training and an attached source are never undone, so later blocks need not check again.
            ThrowIfDisposed();
            if (queryCount > 0)
            {
                ThrowIfNotTrained();
            }

            results = BatchSearch.CreateResults(queryCount, k, _count);
            if (queryCount == 0 || _count == 0)
            {
                return results;
            }

            if (ReadsFullVectorsExternally && _source is null && (run.RescoreDepth ?? _tuned?.RescoreDepth ?? SharedOptions.RescoreDepth) > 0)
            {
                SourceRows.ThrowNoSource();
            }
        }

        SearchBatchBlocks(prepared, results, run, progress, cancellationToken);
        return results;
    }

    /// <summary>Frees the index's storage. Further calls throw <see cref="ObjectDisposedException"/>; a second call does nothing.</summary>
    public void Dispose()
    {
        using var gate = _writerGate.EnterRead();
        using var write = _lock.EnterWrite();
        if (_disposed)
        {
            return;
        }

        _disposed = true;
        ReleaseStorage();
        _slotOf.Clear();
        _count = 0;
    }

    /// <summary>Bytes held (the kind's <see cref="MemoryBytes"/>), under the read lock.</summary>
    private protected abstract long MemoryBytesLocked();

    /// <summary>Copies the vector stored in <paramref name="slot"/> (no external source attached), under the read lock.</summary>
    private protected abstract void CopyStoredLocked(int slot, Span<float> destination);

    /// <summary>
    /// Writes a validated, non-empty batch (with <paramref name="replace"/>, ids present get new vectors); all or
    /// nothing, cancellable as the kind documents. Takes the lock itself. Returns how many ids were replaced.
    /// </summary>
    private protected abstract int WriteBatch(ReadOnlySpan<long> ids, ReadOnlySpan<float> vectors, bool replace, IProgress<int>? progress, CancellationToken cancellationToken);

    /// <summary>Removes ids that are all present and distinct, under the write lock.</summary>
    private protected abstract void RemoveLocked(ReadOnlySpan<long> ids);

    /// <summary>One search; the caller holds the read lock, the index is trained and not empty, and q is prepared.</summary>
    private protected abstract int SearchLocked(ReadOnlySpan<float> q, Span<SearchHit> destination, SearchOptions options);

    /// <summary>
    /// A batch of prepared queries, blocks of queries in parallel, each block under the read lock (taken by
    /// <see cref="BatchSearch"/> through <see cref="EnterSearchBlock"/>); by default each query runs <see cref="SearchLocked"/>.
    /// </summary>
    private protected virtual void SearchBatchBlocks(ReadOnlySpan<float> queries, BatchSearchResults results, SearchOptions options, IProgress<int>? progress, CancellationToken cancellationToken)
        => BatchSearch.RunQueries(this, queries, Dimension, results, QueryBlock, options, progress, cancellationToken, static () => 0, (q, slots, _) => SearchLocked(q, slots, options));

    /// <summary>Enters the read lock for one block of a batch search; throws when the index was disposed meanwhile.</summary>
    internal IndexLock.BatchReadScope EnterSearchBlock()
    {
        _lock.EnterBatchReadLock();
        if (_disposed)
        {
            _lock.ExitBatchReadLock();
            ThrowHelper.ThrowObjectDisposed(this);
        }

        return new IndexLock.BatchReadScope(_lock);
    }

    /// <summary>
    /// Called before a batch of <paramref name="added"/> rows (at most) is written, outside both locks: when the
    /// storage or the id map would have to grow, they are copied into larger ones beside searches (holding the writer
    /// gate alone, so no write changes them) and swapped in under a short write lock, instead of growing in place under
    /// the write lock. Only a hint: a concurrent write may use the room first, and the write then grows under the lock.
    /// </summary>
    private void ReserveRows(int added)
    {
        if (HasRoomFor(added))
        {
            return;
        }

        using var gate = _writerGate.EnterWrite();
        ReserveRowsHoldingGate(added);
    }

    // ReserveRows' work, with the writer gate held exclusively.
    private void ReserveRowsHoldingGate(int added)
    {
        if (IsDisposed || IsReadOnly)
        {
            // A read-only (mapped) index refuses the write itself.
            return;
        }

        IdMap? slotOf = IdMapMustGrow(added) ? _slotOf.GrownCopy((int)Math.Min(Array.MaxLength, Math.Max((long)_slotOf.Count + added, 2L * _slotOf.Count))) : null;
        if (!GrowRows(added, slotOf) && slotOf is not null)
        {
            using (_lock.EnterWrite())
            {
                _slotOf = slotOf;
            }
        }
    }

    /// <summary>
    /// Before a bulk load of <paramref name="added"/> rows (a streamed build, right after training on
    /// <paramref name="sample"/>, rows drawn from the same file): kinds that store per-list data reserve their rows and
    /// id map once and size their lists from where the sample falls, instead of growing them batch after batch. Only a
    /// hint; the load adds its rows as usual.
    /// </summary>
    internal void PrepareBulkLoad(ReadOnlySpan<float> sample, long added, CancellationToken cancellationToken)
    {
        if (!SizesStorageFromSample || added <= 0 || sample.IsEmpty)
        {
            return;
        }

        int rows = (int)Math.Min(added, Array.MaxLength - Count);
        ReserveRows(rows);
        ReserveFromSample(sample, rows, cancellationToken);
    }

    /// <summary>Whether <see cref="PrepareBulkLoad"/> applies to this kind.</summary>
    private protected virtual bool SizesStorageFromSample => false;

    /// <summary>For <see cref="PrepareBulkLoad"/>: sizes the kind's own storage for <paramref name="added"/> rows distributed as <paramref name="sample"/> is.</summary>
    private protected virtual void ReserveFromSample(ReadOnlySpan<float> sample, int added, CancellationToken cancellationToken)
    {
    }

    /// <summary>
    /// For <see cref="ReserveRows"/>, with the writer gate held exclusively: copies the kind's rows into storage with
    /// room for <paramref name="added"/> more, beside searches, and swaps it in under a short write lock, together with
    /// <paramref name="slotOf"/> when given (the grown id map). False when the rows have room (or cannot grow further):
    /// the caller then swaps the map in alone.
    /// </summary>
    private protected virtual bool GrowRows(int added, IdMap? slotOf) => false;

    /// <summary>
    /// Whether the storage and the id map have room for <paramref name="added"/> more items without growing under the
    /// write lock; a hint (concurrent writes may use the room first). Kinds that reserve rows override it.
    /// </summary>
    private protected virtual bool HasRoomFor(int added) => true;

    /// <summary>
    /// Reserves room for a batch of <paramref name="added"/> (<see cref="ReserveRows"/>), then enters the writer gate
    /// for the write. A compaction may trim the room between the two (it holds the gate alone); the room is then
    /// reserved again holding the gate's upgradeable side, which keeps compactions out until the write holds the gate,
    /// so the storage grows beside searches, never under the write lock (unless it cannot grow further).
    /// </summary>
    private LockScopes.ReadScope EnterGateWithRoom(int added)
    {
        ReserveRows(added);
        LockScopes.ReadScope gate = _writerGate.EnterRead();
        if (HasRoomFor(added))
        {
            return gate;
        }

        gate.Dispose();
        _writerGate.EnterUpgradeableReadLock();
        try
        {
            if (!HasRoomFor(added))
            {
                _writerGate.EnterWriteLock();
                try
                {
                    ReserveRowsHoldingGate(added);
                }
                finally
                {
                    _writerGate.ExitWriteLock();
                }
            }

            return _writerGate.EnterRead();
        }
        finally
        {
            _writerGate.ExitUpgradeableReadLock();
        }
    }

    /// <summary>
    /// Whether adding <paramref name="added"/> ids would grow the id map in place, under the write lock (a rehash of
    /// every entry). Reads the map's sizes only, so <see cref="HasRoomFor"/> may ask before the gate is taken.
    /// </summary>
    private protected bool IdMapMustGrow(int added) => !IsReadOnly && (long)_slotOf.Count + added > _slotOf.Capacity;

    /// <summary>
    /// Runs after every write has left both locks: a kind finishes deferred maintenance here (the graph's global
    /// reachability pass), under the writer gate and in short steps of the write lock.
    /// </summary>
    private protected virtual void AfterWrite()
    {
    }

    /// <summary>
    /// The width a search uses: the call's <see cref="SearchOptions.SearchWidth"/>, else the tuned default, else the
    /// options' <paramref name="optionsWidth"/>.
    /// </summary>
    private protected int SearchWidthFor(SearchOptions options, int optionsWidth) => options.SearchWidth ?? _tuned?.SearchWidth ?? optionsWidth;

    /// <summary>
    /// How many candidates a search re-scores on the full vectors: the call's <see cref="SearchOptions.RescoreDepth"/>,
    /// else the tuned default, else the index's, when the index keeps full vectors (in memory or in a source); otherwise 0. Throws when the depth is
    /// positive and the source it needs is not attached.
    /// </summary>
    private protected int RescoreDepthFor(SearchOptions options)
    {
        int depth = SharedOptions.Rescores ? options.RescoreDepth ?? _tuned?.RescoreDepth ?? SharedOptions.RescoreDepth : 0;
        if (depth > 0 && ReadsFullVectorsExternally && _source is null)
        {
            SourceRows.ThrowNoSource();
        }

        return depth;
    }

    /// <summary>
    /// Replaces the candidates' code distances with exact ones, from the full vectors kept in memory
    /// (<paramref name="fullRows"/>, by slot: <paramref name="slots"/>[i] for candidate i when the caller knows them, else
    /// through the id map) or from the attached source; the caller holds the read lock and sorts after.
    /// </summary>
    private protected void RescoreLocked(KernelPath path, ref float query, Span<SearchHit> candidates, VectorBuffer? fullRows, int[]? slots = null)
    {
        // The source cannot change during a search: attaching takes the write lock.
        if (fullRows is not null && slots is not null)
        {
            ExactRescoring.Rescore(Metric, path, ref query, Dimension, candidates, new ListedRows(fullRows, slots));
        }
        else if (fullRows is not null)
        {
            ExactRescoring.Rescore(Metric, path, ref query, Dimension, candidates, new SlotRows(fullRows, _slotOf));
        }
        else
        {
            ExactRescoring.Rescore(Metric, path, ref query, Dimension, candidates, new SourceRows(_source!, Dimension, Metric == DistanceMetric.Cosine));
        }
    }

    /// <summary>Frees the kind's storage; the caller holds the write lock, once.</summary>
    private protected abstract void ReleaseStorage();

    /// <summary>Whether the kind refuses writes (an index reading a mapped file in place).</summary>
    private protected virtual bool IsReadOnly => false;

    /// <summary>Throws <see cref="NotSupportedException"/> when <see cref="IsReadOnly"/>; every write path checks it before changing anything.</summary>
    private protected void ThrowIfReadOnly()
    {
        if (IsReadOnly)
        {
            ThrowHelper.ThrowReadOnlyIndex(GetType().Name);
        }
    }

    private protected void ThrowIfDisposed()
    {
        if (_disposed)
        {
            ThrowHelper.ThrowObjectDisposed(this);
        }
    }

    private protected void ThrowIfNotTrained()
    {
        if (!IsTrained)
        {
            throw new IndexNotTrainedException(NotTrainedMessage);
        }
    }

    /// <summary>The longest exclusive step (write-lock hold) since the last <see cref="ResetLongestWriteHold"/>, for benchmarks.</summary>
    internal TimeSpan LongestWriteHold => _lock.LongestWriteHold;

    internal void ResetLongestWriteHold() => _lock.ResetLongestWriteHold();

    /// <summary>Records this index's exclusive steps longer than <paramref name="threshold"/> (see <see cref="IndexLock.TakeLongHolds"/>), for benchmarks.</summary>
    internal void TraceWriteHoldsLongerThan(TimeSpan threshold) => _lock.TraceHoldsLongerThan = (long)(threshold.TotalSeconds * System.Diagnostics.Stopwatch.Frequency);

    /// <summary>While tracing, this index's exclusive steps of any length that overlapped the two Stopwatch times (see <see cref="IndexLock.HoldsBetween"/>).</summary>
    internal List<(long RaisedTicks, long LeftTicks)> WriteHoldsBetween(long fromTicks, long toTicks) => _lock.HoldsBetween(fromTicks, toTicks);

    /// <summary>While tracing, how many exclusive steps this index has recorded in all (see <see cref="IndexLock.HoldsRecorded"/>).</summary>
    internal long WriteHoldsRecorded => _lock.HoldsRecorded;

    /// <summary>Threads waiting to write: on the write lock, or at the writer gate (for tests).</summary>
    internal int WaitingWriters => _lock.WaitingWriteCount + _writerGate.WaitingReadCount + _writerGate.WaitingWriteCount;

    /// <summary>Whether <see cref="Dispose"/> has run (for a kind's own steps that end quietly on a disposed index).</summary>
    private protected bool IsDisposed => _disposed;
}
