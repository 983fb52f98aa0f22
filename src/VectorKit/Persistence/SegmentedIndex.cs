using System.Buffers;
using System.IO.Pipelines;
using System.Runtime.ExceptionServices;
using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Indexes.Graph;
using VectorKit.Indexes.InvertedFile;
using VectorKit.Internal;

namespace VectorKit.Persistence;

/// <summary>
/// A writable index over a read-only mapped file of any kind: adds and replacements go to an in-memory exact segment
/// searched beside the mapped index (the base), removals of the base's items are masked, and results from every part
/// are merged by distance, ties by id. Over a float32 exact base, searches return exactly what one in-memory
/// <see cref="ExactIndex"/> holding the same items would. <see cref="Save"/> writes everything as one new file of the
/// base's kind and options, atomically; <see cref="MergeAsync"/> does the same in the background and then serves the
/// new file mapped in place of the old one and the segments it folded in.
/// </summary>
/// <remarks>
/// <para><b>Parts.</b> The base, the sealed segments a running or failed merge froze, and the active segment that
/// takes writes. Every id is live in at most one part. A search asks each part for its best k (see <b>Results</b>) and
/// keeps the best k of all, ordered by distance, ties by id.</para>
/// <para><b>Bases.</b> Any <see cref="ExactIndex"/>, <see cref="GraphIndex"/> or <see cref="InvertedFileIndex"/>
/// (usually one opened with <see cref="IndexFile.OpenMapped(string, MappedOpenOptions?, CancellationToken)"/>) whose
/// searches return full-precision distances: float32 storage, or compressed codes re-scored on full vectors kept in the
/// index (a positive <see cref="VectorIndexOptions.RescoreDepth"/>, full vectors
/// <see cref="FullVectorLocation.InIndexMemory"/>). Those distances are the metric's own, the same numbers the float32
/// segments give, so merging by distance is sound. A base whose distances are code approximations (no re-scoring) is
/// refused: its errors differ from item to item, so a segment item would be ranked above or below base items by the
/// codes' error rather than by distance. A base that re-scores from an external source is refused too (a save or merge
/// could not give the segments' items full vectors the source does not hold), and so is an untrained one.</para>
/// <para><b>Results.</b> Segments are searched exactly; the base as it searches itself, with the caller's
/// <see cref="SearchOptions"/> (width, re-score depth, filter). So over an approximate base every segment item among
/// the true best k is returned, and the base's items are found as well as the base finds them. Masked base items are
/// passed to an approximate base as a filter (its walk or probes stay as wide as asked); from an exhaustive float32
/// exact part, the best k + masked are asked for unless many ids are masked.</para>
/// <para><b>Saving.</b> Over a float32 exact base the live rows of every part are streamed into the new file. Over
/// any other base, a save or merge loads a full copy of the base into memory (read from the base itself), removes the
/// masked ids from it, adds the segments' items (coded with the base's training; graph items linked as adds link
/// them), and saves it with the base's options and tuned defaults. Removed graph items stay in the new file as removed
/// slots, as after the graph's own removals, until the graph is compacted. Under the cosine metric the segments' rows,
/// already normalised, are normalised again when added, which may change their last bit.</para>
/// <para><b>Costs.</b> Masked ids and the segments live in memory until a merge folds them into a new file. A save or
/// merge over a float32 exact base sorts the ids it writes (12 bytes per item of temporary memory); over any other
/// base it holds the base's full in-memory copy until the new file is written.</para>
/// <para><b>Thread safety.</b> All members are thread-safe. Searches run concurrently with each other and with saves
/// and merges; writes are exclusive and wait for a save. A merge writes its file without blocking searches or writes,
/// then swaps the new base in under a short exclusive lock. One merge runs at a time.</para>
/// </remarks>
public sealed class SegmentedIndex : IVectorIndex
{
    // A part with more masked ids than this is searched with a filter instead of asking for k + masked results.
    private const int OverfetchLimit = 4096;

    private readonly ReaderWriterLockSlim _lock = new(LockRecursionPolicy.NoRecursion);

    // Serialises writes, saves and the two short steps of a merge; searches never take it.
    private readonly SemaphoreSlim _gate = new(1, 1);
    private readonly List<Segment> _sealed = [];
    private readonly CancellationTokenSource _disposing = new();
    private VectorIndex _base;
    private HashSet<long> _baseMasked = [];
    private ExactIndex _active;
    private Task? _merge;
    private bool _disposed;

    /// <summary>Wraps <paramref name="baseIndex"/>, taking ownership of it (it is disposed with this index, or when a merge replaces it).</summary>
    /// <param name="baseIndex">
    /// An exact, graph or inverted-file index, usually one opened with
    /// <see cref="IndexFile.OpenMapped(string, MappedOpenOptions?, CancellationToken)"/>; it is never written to. Its
    /// searches must return full-precision distances: float32 storage, or codes re-scored on full vectors kept in the
    /// index (see the remarks on <see cref="SegmentedIndex"/>).
    /// </param>
    /// <exception cref="ArgumentNullException"><paramref name="baseIndex"/> is null.</exception>
    /// <exception cref="ArgumentException">
    /// The base is not trained (a merge adds the segments' items with its training), stores codes without re-scoring (its distances are the codes' approximations, which cannot be merged
    /// with a float32 segment's exact distances), its tuned defaults turn re-scoring off, or it re-scores from an
    /// external full-vector source (the segments' items could not be saved with full vectors).
    /// </exception>
    public SegmentedIndex(VectorIndex baseIndex)
    {
        ArgumentNullException.ThrowIfNull(baseIndex);
        CheckBase(baseIndex);
        _base = baseIndex;
        _active = new ExactIndex(baseIndex.Dimension, baseIndex.Metric);
    }

    /// <summary>Opens <paramref name="path"/> mapped (<see cref="IndexFile.OpenMapped(string, MappedOpenOptions?, CancellationToken)"/>) and wraps it.</summary>
    /// <param name="path">An exact, graph or inverted-file index file whose index the constructor accepts.</param>
    /// <param name="options">As for <see cref="IndexFile.OpenMapped(string, MappedOpenOptions?, CancellationToken)"/>.</param>
    /// <returns>The segmented index; the caller owns (and disposes) it.</returns>
    /// <exception cref="IndexFileException">As for <see cref="IndexFile.OpenMapped(string, MappedOpenOptions?, CancellationToken)"/>.</exception>
    /// <exception cref="NotSupportedException">As for <see cref="IndexFile.OpenMapped(string, MappedOpenOptions?, CancellationToken)"/>.</exception>
    /// <exception cref="ArgumentException">The file's index is not trained, stores codes without re-scoring, or re-scores from an external source (see <see cref="SegmentedIndex(VectorIndex)"/>).</exception>
    public static SegmentedIndex Open(string path, MappedOpenOptions? options = null)
    {
        var mapped = (VectorIndex)IndexFile.OpenMapped(path, options);
        try
        {
            return new SegmentedIndex(mapped);
        }
        catch
        {
            mapped.Dispose();
            throw;
        }
    }

    /// <inheritdoc/>
    public int Dimension => _active.Dimension;

    /// <inheritdoc/>
    public DistanceMetric Metric => _active.Metric;

    /// <summary>The base's options: the kind and settings a save or merge writes (the segments hold float32 rows whatever they say).</summary>
    public VectorIndexOptions Options => ((IVectorIndex)Volatile.Read(ref _base)).Options;

    /// <inheritdoc/>
    public int Count
    {
        get
        {
            using var read = _lock.EnterRead();
            ThrowIfDisposed();
            long count = (long)_base.Count - _baseMasked.Count + _active.Count;
            foreach (Segment segment in _sealed)
            {
                count += segment.Index.Count - segment.Masked.Count;
            }

            return (int)count;
        }
    }

    /// <summary>Items in the in-memory segments (active and sealed), what a merge would fold into the file.</summary>
    public int SegmentCount
    {
        get
        {
            using var read = _lock.EnterRead();
            ThrowIfDisposed();
            int count = _active.Count;
            foreach (Segment segment in _sealed)
            {
                count += segment.Index.Count - segment.Masked.Count;
            }

            return count;
        }
    }

    /// <summary>Items of the base hidden by removals or replacements since it was opened or last merged.</summary>
    public int MaskedCount
    {
        get
        {
            using var read = _lock.EnterRead();
            ThrowIfDisposed();
            return _baseMasked.Count;
        }
    }

    /// <summary>Whether a merge is running.</summary>
    public bool IsMerging => Volatile.Read(ref _merge) is { IsCompleted: false };

    /// <inheritdoc/>
    /// <remarks>Heap and native memory of the segments, masks and id lookups; the mapped file's pages belong to the page cache and are not counted.</remarks>
    public long MemoryBytes
    {
        get
        {
            using var read = _lock.EnterRead();
            ThrowIfDisposed();
            long bytes = _base.MemoryBytes + _active.MemoryBytes + (_baseMasked.Count * 16L);
            foreach (Segment segment in _sealed)
            {
                bytes += segment.Index.MemoryBytes + (segment.Masked.Count * 16L);
            }

            return bytes;
        }
    }

    /// <summary>The base's bytes per stored vector (what each item costs once merged into the file); an item in a segment costs 4 × <see cref="Dimension"/>.</summary>
    public int CodeBytesPerVector => Volatile.Read(ref _base).CodeBytesPerVector;

    /// <inheritdoc/>
    public bool Contains(long id)
    {
        using var read = _lock.EnterRead();
        ThrowIfDisposed();
        return Locate(id) is not null;
    }

    /// <inheritdoc/>
    public bool TryGetVector(long id, Span<float> destination)
    {
        VectorChecks.CheckVectorDestination(destination, Dimension);
        using var read = _lock.EnterRead();
        ThrowIfDisposed();
        return Locate(id) is VectorIndex part && part.TryGetVector(id, destination);
    }

    /// <inheritdoc/>
    public long[] GetIds()
    {
        using var read = _lock.EnterRead();
        ThrowIfDisposed();
        var ids = new List<long>(_base.Count - _baseMasked.Count + _active.Count);
        AddLive(ids, _base, _baseMasked);
        foreach (Segment segment in _sealed)
        {
            AddLive(ids, segment.Index, segment.Masked);
        }

        ids.AddRange(_active.GetIds());
        long[] all = [.. ids];
        Array.Sort(all);
        return all;
    }

    /// <inheritdoc/>
    public void Add(long id, ReadOnlySpan<float> vector) => AddRange([id], vector);

    /// <inheritdoc/>
    public void AddRange(ReadOnlySpan<long> ids, ReadOnlySpan<float> vectors, IProgress<int>? progress = null, CancellationToken cancellationToken = default)
    {
        VectorChecks.CheckBatchForAdd(ids, vectors, Dimension, Metric);
        using var gate = _gate.EnterScope(CancellationToken.None);
        ThrowIfDisposed();
        foreach (long id in ids)
        {
            if (LocateBelowActive(id) is not null)
            {
                ThrowHelper.ThrowDuplicateId(nameof(ids), id);
            }
        }

        // The active segment validates the rest and writes all or nothing; nothing below it changes.
        using var write = _lock.EnterWrite();
        _active.AddRange(ids, vectors, progress, cancellationToken);
    }

    /// <inheritdoc/>
    public bool AddOrReplace(long id, ReadOnlySpan<float> vector) => AddOrReplaceRange([id], vector) == 1;

    /// <inheritdoc/>
    public int AddOrReplaceRange(ReadOnlySpan<long> ids, ReadOnlySpan<float> vectors, IProgress<int>? progress = null, CancellationToken cancellationToken = default)
    {
        VectorChecks.CheckBatchForAdd(ids, vectors, Dimension, Metric);
        using var gate = _gate.EnterScope(CancellationToken.None);
        ThrowIfDisposed();
        using var write = _lock.EnterWrite();

        // The new rows first (all or nothing); only then are the older versions below masked, which cannot fail.
        int replaced = _active.AddOrReplaceRange(ids, vectors, progress, cancellationToken);
        foreach (long id in ids)
        {
            if (Mask(id))
            {
                replaced++;
            }
        }

        return replaced;
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

        using var gate = _gate.EnterScope(CancellationToken.None);
        ThrowIfDisposed();
        using var write = _lock.EnterWrite();
        foreach (long id in ids)
        {
            if (Locate(id) is null)
            {
                ThrowHelper.ThrowIdNotFound(id);
            }
        }

        var fromActive = new List<long>();
        foreach (long id in ids)
        {
            if (_active.Contains(id))
            {
                fromActive.Add(id);
            }
            else
            {
                Mask(id);
            }
        }

        _active.RemoveRange(fromActive.ToArray());
    }

    /// <inheritdoc/>
    /// <remarks>Releases the active segment's growth slack. The mapped base is compacted by <see cref="MergeAsync"/>, which writes it anew.</remarks>
    public void Compact(IProgress<int>? progress = null, CancellationToken cancellationToken = default)
    {
        using var gate = _gate.EnterScope(cancellationToken);
        ThrowIfDisposed();
        _active.Compact(progress, cancellationToken);
    }

    /// <inheritdoc/>
    /// <remarks>
    /// The best k of all parts' results. Over a float32 exact base this is exact: the same ids and distances (bit for
    /// bit) one <see cref="ExactIndex"/> holding the same items returns. Over an approximate base, the base is searched
    /// with <paramref name="options"/> as it searches itself (masked items filtered out) and the segments exactly.
    /// </remarks>
    /// <exception cref="ArgumentException"><paramref name="options"/> sets <see cref="SearchOptions.RescoreDepth"/> to 0 over a base that stores codes (its distances would be the codes' approximations).</exception>
    public int Search(ReadOnlySpan<float> query, Span<SearchHit> destination, SearchOptions? options = null)
    {
        VectorChecks.CheckResultDestination(destination);
        options ??= SearchOptions.Default;
        int k = destination.Length;
        using var read = _lock.EnterRead();
        ThrowIfDisposed();
        CheckSearchOptions(_base, options);

        // The active segment validates (and under cosine normalises) the query exactly as one exact index would.
        int found = _active.Search(query, destination, options);
        if (_base.Count == 0 && _sealed.Count == 0)
        {
            return found;
        }

        SearchHit[] rented = ArrayPool<SearchHit>.Shared.Rent(k);
        try
        {
            found = MergePart(_base, _baseMasked, query, destination, found, options, rented);
            foreach (Segment segment in _sealed)
            {
                found = MergePart(segment.Index, segment.Masked, query, destination, found, options, rented);
            }

            return found;
        }
        finally
        {
            ArrayPool<SearchHit>.Shared.Return(rented);
        }
    }

    /// <inheritdoc/>
    /// <remarks>Each query runs <see cref="Search"/> (so a batch returns exactly what single searches return), queries in parallel up to <see cref="SearchOptions.MaxDegreeOfParallelism"/>.</remarks>
    /// <exception cref="ArgumentException"><paramref name="options"/> sets <see cref="SearchOptions.RescoreDepth"/> to 0 over a base that stores codes.</exception>
    public BatchSearchResults SearchBatch(ReadOnlySpan<float> queries, int k, SearchOptions? options = null, IProgress<int>? progress = null, CancellationToken cancellationToken = default)
    {
        VectorChecks.CheckBatchQueries(queries, k, Dimension, Metric, out int queryCount);
        options ??= SearchOptions.Default;
        CheckSearchOptions(Volatile.Read(ref _base), options);
        BatchSearchResults results = BatchSearch.CreateResults(queryCount, k, Count);
        if (queryCount == 0)
        {
            return results;
        }

        float[] copy = queries.ToArray();
        int d = Dimension;
        int done = 0;
        try
        {
            Parallel.For(
                0,
                queryCount,
                new ParallelOptions { MaxDegreeOfParallelism = options.EffectiveParallelism, CancellationToken = cancellationToken },
                q =>
                {
                    results.SetCount(q, Search(copy.AsSpan(q * d, d), results.Slots(q), options));
                    int now = Interlocked.Increment(ref done);
                    progress?.Report(now);
                });
        }
        catch (AggregateException e) when (e.InnerExceptions.Count > 0)
        {
            ExceptionDispatchInfo.Capture(e.InnerExceptions[0]).Throw();
        }

        return results;
    }

    /// <summary>
    /// Writes every live item as one index file of the base's kind and options (for a float32 exact base, a float32 exact
    /// index file of format version 3), atomically, as <see cref="IndexFile.Save(IVectorIndex, string, CancellationToken)"/> does.
    /// </summary>
    /// <param name="path">The file to create or replace; it may be the file the base is mapped from (the mapping keeps the old contents).</param>
    /// <param name="progress">Items written so far (over a base other than float32 exact: items of the copy so far, the base's live ones first).</param>
    /// <param name="cancellationToken">Checked between blocks; a cancelled save leaves the previous file as it was.</param>
    /// <remarks>Searches proceed during the save; writes wait for it. Over a base other than float32 exact, the base is copied into memory first (see the remarks on <see cref="SegmentedIndex"/>).</remarks>
    /// <exception cref="ArgumentNullException"><paramref name="path"/> is null.</exception>
    /// <exception cref="ObjectDisposedException">The index was disposed.</exception>
    /// <exception cref="OperationCanceledException">The token was cancelled.</exception>
    /// <exception cref="IOException">Writing or renaming failed (as for <see cref="IndexFile.Save(IVectorIndex, string, CancellationToken)"/>).</exception>
    public void Save(string path, IProgress<int>? progress = null, CancellationToken cancellationToken = default)
    {
        ArgumentException.ThrowIfNullOrEmpty(path);
        using var gate = _gate.EnterScope(cancellationToken);
        ThrowIfDisposed();
        List<Layer> layers = [new(_base, _baseMasked)];
        foreach (Segment segment in _sealed)
        {
            layers.Add(new(segment.Index, segment.Masked));
        }

        layers.Add(new(_active, null));
        WriteFile(path, layers, progress, cancellationToken);
    }

    /// <summary>
    /// Folds the base and the segments into a new file of the base's kind and options at <paramref name="path"/> in the
    /// background, then maps that file as the new base and drops what it folded in. Searches and writes go on
    /// meanwhile: writes made during the merge land in a new active segment, and removals of folded items are masked in
    /// the new base.
    /// </summary>
    /// <param name="path">The file to write (atomically); it may be the file the base is mapped from.</param>
    /// <param name="progress">Items written so far, as for <see cref="Save"/>.</param>
    /// <param name="cancellationToken">Cancels the merge; the index then stays as it was (the frozen segment is kept and searched, and the next merge folds it in).</param>
    /// <returns>A task that completes when the new base is in use; it fails as <see cref="Save"/> does, or with the new file's mapped open, leaving the index as it was.</returns>
    /// <exception cref="InvalidOperationException">Another merge is running.</exception>
    /// <exception cref="ObjectDisposedException">The index was disposed.</exception>
    public Task MergeAsync(string path, IProgress<int>? progress = null, CancellationToken cancellationToken = default)
    {
        ArgumentException.ThrowIfNullOrEmpty(path);
        using var gate = _gate.EnterScope(CancellationToken.None);
        ThrowIfDisposed();
        if (_merge is { IsCompleted: false })
        {
            throw new InvalidOperationException("A merge is already running on this index; wait for it before starting another.");
        }

        // Freeze: the active segment becomes sealed, and what is folded is remembered with copies of the masks as they are now.
        using (_lock.EnterWrite())
        {
            if (_active.Count > 0)
            {
                _sealed.Add(new Segment(_active, []));
                _active = new ExactIndex(_base.Dimension, _base.Metric);
            }
        }

        VectorIndex oldBase = _base;
        var baseMaskedAtFreeze = new HashSet<long>(_baseMasked);
        var folded = _sealed.Select(s => (Segment: s, MaskedAtFreeze: new HashSet<long>(s.Masked))).ToList();
        List<Layer> layers = [new(oldBase, baseMaskedAtFreeze), .. folded.Select(f => new Layer(f.Segment.Index, f.MaskedAtFreeze))];
        var linked = CancellationTokenSource.CreateLinkedTokenSource(cancellationToken, _disposing.Token);
        Task merge = Task.Run(
            () =>
            {
                try
                {
                    WriteFile(path, layers, progress, linked.Token);
                    var merged = (VectorIndex)IndexFile.OpenMapped(path, cancellationToken: linked.Token);
                    SwapIn(merged, oldBase, baseMaskedAtFreeze, folded);
                }
                finally
                {
                    linked.Dispose();
                }
            },
            CancellationToken.None);
        _merge = merge;
        return merge;
    }

    /// <summary>Disposes the base (unmapping its file) and the segments; a running merge is cancelled and waited for first.</summary>
    public void Dispose()
    {
        Task? merge;
        using (_gate.EnterScope(CancellationToken.None))
        {
            if (_disposed)
            {
                return;
            }

            _disposing.Cancel();
            merge = _merge;
        }

        try
        {
            merge?.Wait();
        }
        catch (AggregateException)
        {
            // The merge's own caller observes its failure or cancellation.
        }

        using (_gate.EnterScope(CancellationToken.None))
        using (_lock.EnterWrite())
        {
            if (_disposed)
            {
                return;
            }

            _disposed = true;
            _base.Dispose();
            _active.Dispose();
            foreach (Segment segment in _sealed)
            {
                segment.Index.Dispose();
            }

            _sealed.Clear();
        }
    }

    // A float32 exact base streams every layer's live rows into the file; any other base is copied, changed and saved.
    private static void WriteFile(string path, List<Layer> layers, IProgress<int>? progress, CancellationToken cancellationToken)
    {
        VectorIndex first = layers[0].Index;
        if (first is ExactIndex { Options.Encoding: VectorEncoding.Float32 })
        {
            var exact = layers.ConvertAll(l => new ExactIndexCodec.Layer((ExactIndex)l.Index, l.Masked));
            using DurableFile file = DurableFile.Begin(path, nameof(path), "save the segmented index to");
            file.Write(stream => ExactIndexCodec.WriteLayers(stream, first.Dimension, first.Metric, exact, progress, cancellationToken));
            file.Commit(cancellationToken);
            return;
        }

        using VectorIndex copy = CopyOf(first, cancellationToken);
        if (layers[0].Masked is { Count: > 0 } masked)
        {
            copy.RemoveRange(masked.ToArray());
        }

        int done = copy.Count;
        progress?.Report(done);
        for (int i = 1; i < layers.Count; i++)
        {
            done = AddLiveRows(copy, layers[i], done, progress, cancellationToken);
        }

        IndexFile.Save(copy, path, cancellationToken);
    }

    // A writable in-memory copy of the base, with its options, training and tuned defaults: the base saved into a pipe
    // that a load reads from, so no second copy of its bytes is held and a mapped base is read in place.
    private static VectorIndex CopyOf(VectorIndex source, CancellationToken cancellationToken)
    {
        var pipe = new Pipe(new PipeOptions(pauseWriterThreshold: 4 << 20, resumeWriterThreshold: 2 << 20, useSynchronizationContext: false));
        Task writer = Task.Run(
            () =>
            {
                try
                {
                    IndexFile.Save(source, pipe.Writer.AsStream(leaveOpen: true), cancellationToken);
                    pipe.Writer.Complete();
                }
                catch (Exception e)
                {
                    // The reader then fails with this exception instead of waiting for bytes that never come.
                    pipe.Writer.Complete(e);
                }
            },
            CancellationToken.None);
        try
        {
            return (VectorIndex)IndexFile.Load(pipe.Reader.AsStream(leaveOpen: true), cancellationToken: cancellationToken);
        }
        finally
        {
            // A failed load leaves the writer's flushes returning at once, so it ends before the base can be disposed.
            pipe.Reader.Complete();
            writer.GetAwaiter().GetResult();
        }
    }

    // Adds a segment's live rows to the copy in blocks (bounded temporary memory, cancellation between blocks).
    private static int AddLiveRows(VectorIndex copy, Layer layer, int done, IProgress<int>? progress, CancellationToken cancellationToken)
    {
        const int BlockRows = 4096;
        int d = copy.Dimension;
        var ids = new List<long>(BlockRows);
        float[] rows = new float[BlockRows * d];
        foreach (long id in layer.Index.GetIds())
        {
            if (layer.Masked is not null && layer.Masked.Contains(id))
            {
                continue;
            }

            layer.Index.TryGetVector(id, rows.AsSpan(ids.Count * d, d));
            ids.Add(id);
            if (ids.Count == BlockRows)
            {
                done = AddBlock(copy, ids, rows, done, progress, cancellationToken);
            }
        }

        return ids.Count > 0 ? AddBlock(copy, ids, rows, done, progress, cancellationToken) : done;
    }

    private static int AddBlock(VectorIndex copy, List<long> ids, float[] rows, int done, IProgress<int>? progress, CancellationToken cancellationToken)
    {
        int n = ids.Count;
        copy.AddRange(ids.ToArray(), rows.AsSpan(0, n * copy.Dimension), null, cancellationToken);
        ids.Clear();
        done += n;
        progress?.Report(done);
        return done;
    }

    // The short exclusive step of a merge: the new base replaces the old one and the folded segments; what was removed
    // from them during the merge is masked in the new base.
    private void SwapIn(VectorIndex merged, VectorIndex oldBase, HashSet<long> baseMaskedAtFreeze, List<(Segment Segment, HashSet<long> MaskedAtFreeze)> folded)
    {
        using var gate = _gate.EnterScope(CancellationToken.None);
        using var write = _lock.EnterWrite();
        if (_disposed)
        {
            merged.Dispose();
            return;
        }

        var masked = new HashSet<long>(_baseMasked);
        masked.ExceptWith(baseMaskedAtFreeze);
        foreach ((Segment segment, HashSet<long> atFreeze) in folded)
        {
            foreach (long id in segment.Masked)
            {
                if (!atFreeze.Contains(id))
                {
                    masked.Add(id);
                }
            }

            _sealed.Remove(segment);
            segment.Index.Dispose();
        }

        _base = merged;
        _baseMasked = masked;
        oldBase.Dispose();
    }

    // A base whose distances can be merged with a float32 segment's (see the class remarks).
    private static void CheckBase(VectorIndex baseIndex)
    {
        VectorIndexOptions options = ((IVectorIndex)baseIndex).Options;
        string kind = baseIndex.GetType().Name;
        if (!baseIndex.IsTrained)
        {
            ThrowHelper.ThrowArgument(nameof(baseIndex), $"A segmented index needs a trained base; this {kind} is not trained, so a merge could not add the segments' items to it. Train it and save it before opening it.");
        }

        if (options.Encoding == VectorEncoding.Float32)
        {
            return;
        }

        if (options.RescoreDepth == 0)
        {
            ThrowHelper.ThrowArgument(nameof(baseIndex), $"A segmented index needs a base whose searches return full-precision distances; this {kind} stores {options.Encoding} codes without re-scoring, so its distances are the codes' approximations and cannot be merged with a float32 segment's.");
        }

        if (baseIndex.TunedDefaults?.RescoreDepth == 0)
        {
            ThrowHelper.ThrowArgument(nameof(baseIndex), $"A segmented index needs a base whose searches return full-precision distances; this {kind}'s tuned defaults turn re-scoring off, so its distances would be the codes' approximations.");
        }

        if (options.FullVectors == FullVectorLocation.ExternalSource)
        {
            ThrowHelper.ThrowArgument(nameof(baseIndex), $"A segmented index needs a base that keeps its full vectors in the index; this {kind} re-scores from an external source, which could not take the segments' items when they are saved into the base's kind.");
        }
    }

    private static void CheckSearchOptions(VectorIndex baseIndex, SearchOptions options)
    {
        if (options.RescoreDepth == 0 && ((IVectorIndex)baseIndex).Options.Encoding != VectorEncoding.Float32)
        {
            ThrowHelper.ThrowArgument(nameof(options), $"RescoreDepth 0 turns re-scoring off, so this segmented index's {baseIndex.GetType().Name} base would return its codes' approximate distances, which cannot be merged with the segments' exact ones; leave it null or set it positive.");
        }
    }

    // The part holding id live, or null; caller holds the lock.
    private VectorIndex? Locate(long id)
    {
        if (_active.Contains(id))
        {
            return _active;
        }

        return LocateBelowActive(id);
    }

    private VectorIndex? LocateBelowActive(long id)
    {
        for (int i = _sealed.Count - 1; i >= 0; i--)
        {
            Segment segment = _sealed[i];
            if (segment.Index.Contains(id) && !segment.Masked.Contains(id))
            {
                return segment.Index;
            }
        }

        return _base.Contains(id) && !_baseMasked.Contains(id) ? _base : null;
    }

    // Hides id in the part below the active segment that holds it live; false when none does. Caller holds the write lock.
    private bool Mask(long id)
    {
        for (int i = _sealed.Count - 1; i >= 0; i--)
        {
            Segment segment = _sealed[i];
            if (segment.Index.Contains(id) && !segment.Masked.Contains(id))
            {
                segment.Masked.Add(id);
                return true;
            }
        }

        return _base.Contains(id) && _baseMasked.Add(id);
    }

    // Searches one part below the active segment and merges its live hits into destination[..found] (best first).
    private static int MergePart(VectorIndex part, HashSet<long> masked, ReadOnlySpan<float> query, Span<SearchHit> destination, int found, SearchOptions options, SearchHit[] scratch)
    {
        int k = destination.Length;
        int live = part.Count - masked.Count;
        if (live <= 0)
        {
            return found;
        }

        // Asking a float32 exact scan for more results changes nothing but their number; an approximate base asked for
        // more would search wider than the caller set, so it gets the mask as a filter instead.
        bool exhaustive = part is ExactIndex { Options.Encoding: VectorEncoding.Float32 };
        Span<SearchHit> hits;
        int got;
        if (masked.Count == 0 || masked.Count > OverfetchLimit || !exhaustive)
        {
            SearchOptions run = masked.Count == 0 ? options : WithMask(options, masked);
            hits = scratch.AsSpan(0, k);
            got = part.Search(query, hits, run);
        }
        else
        {
            // The best k live ones are among the best k + masked of the part.
            SearchHit[] wide = ArrayPool<SearchHit>.Shared.Rent(k + masked.Count);
            try
            {
                int all = part.Search(query, wide.AsSpan(0, k + masked.Count), options);
                got = 0;
                for (int i = 0; i < all && got < k; i++)
                {
                    if (!masked.Contains(wide[i].Id))
                    {
                        scratch[got++] = wide[i];
                    }
                }
            }
            finally
            {
                ArrayPool<SearchHit>.Shared.Return(wide);
            }

            hits = scratch.AsSpan(0, k);
        }

        return MergeSorted(destination, found, hits[..got]);
    }

    // Merges two best-first runs into destination, keeping its length's best (ids are distinct across parts).
    private static int MergeSorted(Span<SearchHit> destination, int found, ReadOnlySpan<SearchHit> other)
    {
        int k = destination.Length;
        int total = Math.Min(k, found + other.Length);
        SearchHit[] merged = ArrayPool<SearchHit>.Shared.Rent(total);
        int a = 0;
        int b = 0;
        for (int i = 0; i < total; i++)
        {
            bool takeA = b >= other.Length || (a < found && destination[a].CompareTo(other[b]) <= 0);
            merged[i] = takeA ? destination[a++] : other[b++];
        }

        merged.AsSpan(0, total).CopyTo(destination);
        ArrayPool<SearchHit>.Shared.Return(merged);
        return total;
    }

    private static SearchOptions WithMask(SearchOptions options, HashSet<long> masked)
    {
        Func<long, bool>? filter = options.Filter;
        return new SearchOptions
        {
            Filter = filter is null ? id => !masked.Contains(id) : id => !masked.Contains(id) && filter(id),
            MaxDegreeOfParallelism = options.MaxDegreeOfParallelism,
            SearchWidth = options.SearchWidth,
            RescoreDepth = options.RescoreDepth,
        };
    }

    private static void AddLive(List<long> ids, VectorIndex part, HashSet<long> masked)
    {
        foreach (long id in part.GetIds())
        {
            if (!masked.Contains(id))
            {
                ids.Add(id);
            }
        }
    }

    private void ThrowIfDisposed() => ObjectDisposedException.ThrowIf(_disposed, this);

    /// <summary>A sealed segment: an in-memory exact index no longer written to, and its ids removed or replaced since.</summary>
    private sealed record Segment(ExactIndex Index, HashSet<long> Masked);

    /// <summary>One part as a save or merge writes it: an index that stays still meanwhile, and its ids not to be written.</summary>
    private readonly record struct Layer(VectorIndex Index, IReadOnlySet<long>? Masked);
}
