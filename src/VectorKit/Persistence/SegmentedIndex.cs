using System.Buffers;
using System.Runtime.ExceptionServices;
using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Internal;

namespace VectorKit.Persistence;

/// <summary>
/// A writable exact index over a read-only mapped file: adds and replacements go to an in-memory segment searched
/// beside the mapped index, removals of mapped items are masked, and results from every part are merged, so searches
/// return exactly what one in-memory <see cref="ExactIndex"/> holding the same items would. <see cref="Save"/> writes
/// everything as one new file, atomically; <see cref="MergeAsync"/> does the same in the background and then serves
/// the new file mapped in place of the old one and the segments it folded in.
/// </summary>
/// <remarks>
/// <para><b>Parts.</b> The base (a float32 <see cref="ExactIndex"/> opened with <see cref="IndexFile.OpenMapped(string, MappedOpenOptions?, CancellationToken)"/>, or
/// any float32 exact index), the sealed segments a running or failed merge froze, and the active segment that takes
/// writes. Every id is live in at most one part. A search asks each part for its best k plus its masked ids (or runs
/// it with a filter when many of its ids are masked) and keeps the best k of all, ordered by distance, ties by id.</para>
/// <para><b>Costs.</b> Masked ids and the segments live in memory until a merge folds them into a new file. A save or
/// merge sorts the ids it writes (12 bytes per item of temporary memory).</para>
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
    private ExactIndex _base;
    private HashSet<long> _baseMasked = [];
    private ExactIndex _active;
    private Task? _merge;
    private bool _disposed;

    /// <summary>Wraps <paramref name="baseIndex"/>, taking ownership of it (it is disposed with this index, or when a merge replaces it).</summary>
    /// <param name="baseIndex">A float32 exact index, usually one opened with <see cref="IndexFile.OpenMapped(string, MappedOpenOptions?, CancellationToken)"/>; it is never written to.</param>
    /// <exception cref="ArgumentNullException"><paramref name="baseIndex"/> is null.</exception>
    /// <exception cref="ArgumentException">The base stores 8-bit codes (segments hold float32 rows, and the merged results must be exact distances on both sides).</exception>
    public SegmentedIndex(ExactIndex baseIndex)
    {
        ArgumentNullException.ThrowIfNull(baseIndex);
        if (baseIndex.Options.Encoding != VectorEncoding.Float32)
        {
            ThrowHelper.ThrowArgument(nameof(baseIndex), $"A segmented index needs a float32 exact base; this one stores {baseIndex.Options.Encoding} codes, whose distances cannot be merged exactly with a float32 segment's.");
        }

        _base = baseIndex;
        _active = new ExactIndex(baseIndex.Dimension, baseIndex.Metric);
    }

    /// <summary>Opens <paramref name="path"/> mapped (<see cref="IndexFile.OpenMapped(string, MappedOpenOptions?, CancellationToken)"/>) and wraps it.</summary>
    /// <param name="path">A float32 exact index file.</param>
    /// <param name="options">As for <see cref="IndexFile.OpenMapped(string, MappedOpenOptions?, CancellationToken)"/>.</param>
    /// <returns>The segmented index; the caller owns (and disposes) it.</returns>
    /// <exception cref="IndexFileException">As for <see cref="IndexFile.OpenMapped(string, MappedOpenOptions?, CancellationToken)"/>.</exception>
    /// <exception cref="NotSupportedException">The file holds another kind of index.</exception>
    /// <exception cref="ArgumentException">The file's exact index stores 8-bit codes.</exception>
    public static SegmentedIndex Open(string path, MappedOpenOptions? options = null)
    {
        ExactIndex mapped = IndexFile.OpenMapped<ExactIndex>(path, options);
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

    /// <inheritdoc/>
    public VectorIndexOptions Options => _active.Options;

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

    /// <inheritdoc/>
    public int CodeBytesPerVector => Dimension * sizeof(float);

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
        return Locate(id) is ExactIndex part && part.TryGetVector(id, destination);
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
    /// <remarks>Exact: the best k of all parts' live items, the same ids and distances (bit for bit) one <see cref="ExactIndex"/> holding the same items returns.</remarks>
    public int Search(ReadOnlySpan<float> query, Span<SearchHit> destination, SearchOptions? options = null)
    {
        VectorChecks.CheckResultDestination(destination);
        options ??= SearchOptions.Default;
        int k = destination.Length;
        using var read = _lock.EnterRead();
        ThrowIfDisposed();

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
    public BatchSearchResults SearchBatch(ReadOnlySpan<float> queries, int k, SearchOptions? options = null, IProgress<int>? progress = null, CancellationToken cancellationToken = default)
    {
        VectorChecks.CheckBatchQueries(queries, k, Dimension, Metric, out int queryCount);
        options ??= SearchOptions.Default;
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

    /// <summary>Writes every live item as one float32 exact index file (format version 3), atomically, as <see cref="IndexFile.Save(IVectorIndex, string, CancellationToken)"/> does.</summary>
    /// <param name="path">The file to create or replace; it may be the file the base is mapped from (the mapping keeps the old contents).</param>
    /// <param name="progress">Rows written so far.</param>
    /// <param name="cancellationToken">Checked between blocks; a cancelled save leaves the previous file as it was.</param>
    /// <remarks>Searches proceed during the save; writes wait for it.</remarks>
    /// <exception cref="ArgumentNullException"><paramref name="path"/> is null.</exception>
    /// <exception cref="ObjectDisposedException">The index was disposed.</exception>
    /// <exception cref="OperationCanceledException">The token was cancelled.</exception>
    /// <exception cref="IOException">Writing or renaming failed (as for <see cref="IndexFile.Save(IVectorIndex, string, CancellationToken)"/>).</exception>
    public void Save(string path, IProgress<int>? progress = null, CancellationToken cancellationToken = default)
    {
        ArgumentException.ThrowIfNullOrEmpty(path);
        using var gate = _gate.EnterScope(cancellationToken);
        ThrowIfDisposed();
        List<ExactIndexCodec.Layer> layers = [new(_base, _baseMasked)];
        foreach (Segment segment in _sealed)
        {
            layers.Add(new(segment.Index, segment.Masked));
        }

        layers.Add(new(_active, null));
        WriteFile(path, layers, progress, cancellationToken);
    }

    /// <summary>
    /// Folds the base and the segments into a new file at <paramref name="path"/> in the background, then maps that file
    /// as the new base and drops what it folded in. Searches and writes go on meanwhile: writes made during the merge
    /// land in a new active segment, and removals of folded items are masked in the new base.
    /// </summary>
    /// <param name="path">The file to write (atomically); it may be the file the base is mapped from.</param>
    /// <param name="progress">Rows written so far.</param>
    /// <param name="cancellationToken">Cancels the merge; the index then stays as it was (the frozen segment is kept and searched, and the next merge folds it in).</param>
    /// <returns>A task that completes when the new base is in use.</returns>
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

        ExactIndex oldBase = _base;
        var baseMaskedAtFreeze = new HashSet<long>(_baseMasked);
        var folded = _sealed.Select(s => (Segment: s, MaskedAtFreeze: new HashSet<long>(s.Masked))).ToList();
        List<ExactIndexCodec.Layer> layers = [new(oldBase, baseMaskedAtFreeze), .. folded.Select(f => new ExactIndexCodec.Layer(f.Segment.Index, f.MaskedAtFreeze))];
        var linked = CancellationTokenSource.CreateLinkedTokenSource(cancellationToken, _disposing.Token);
        Task merge = Task.Run(
            () =>
            {
                try
                {
                    WriteFile(path, layers, progress, linked.Token);
                    ExactIndex merged = IndexFile.OpenMapped<ExactIndex>(path, cancellationToken: linked.Token);
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

    private static void WriteFile(string path, List<ExactIndexCodec.Layer> layers, IProgress<int>? progress, CancellationToken cancellationToken)
    {
        ExactIndex first = layers[0].Index;
        using DurableFile file = DurableFile.Begin(path, nameof(path), "save the segmented index to");
        file.Write(stream => ExactIndexCodec.WriteLayers(stream, first.Dimension, first.Metric, layers, progress, cancellationToken));
        file.Commit(cancellationToken);
    }

    // The short exclusive step of a merge: the new base replaces the old one and the folded segments; what was removed
    // from them during the merge is masked in the new base.
    private void SwapIn(ExactIndex merged, ExactIndex oldBase, HashSet<long> baseMaskedAtFreeze, List<(Segment Segment, HashSet<long> MaskedAtFreeze)> folded)
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

    // The part holding id live, or null; caller holds the lock.
    private ExactIndex? Locate(long id)
    {
        if (_active.Contains(id))
        {
            return _active;
        }

        return LocateBelowActive(id);
    }

    private ExactIndex? LocateBelowActive(long id)
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
    private static int MergePart(ExactIndex part, HashSet<long> masked, ReadOnlySpan<float> query, Span<SearchHit> destination, int found, SearchOptions options, SearchHit[] scratch)
    {
        int k = destination.Length;
        int live = part.Count - masked.Count;
        if (live <= 0)
        {
            return found;
        }

        Span<SearchHit> hits;
        int got;
        if (masked.Count == 0 || masked.Count > OverfetchLimit)
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

    private static void AddLive(List<long> ids, ExactIndex part, HashSet<long> masked)
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
}
