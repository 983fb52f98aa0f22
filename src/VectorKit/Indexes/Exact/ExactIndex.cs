using System.Runtime.CompilerServices;
using System.Runtime.InteropServices;
using VectorKit.Distance;
using VectorKit.Distance.Kernels;
using VectorKit.Quantization;
using VectorKit.Internal;

namespace VectorKit.Indexes.Exact;

/// <summary>
/// Exact (brute-force) k-nearest-neighbour search: every query is compared with every stored vector. It is the
/// ground truth approximate indexes are measured against, and the right choice while a full scan is fast enough.
/// </summary>
/// <remarks>
/// <para><b>Storage.</b> All vectors sit in one contiguous native block with one id per row (and, except under cosine,
/// one squared norm). Removing a vector moves the last row into its place, so the scan never meets holes;
/// <see cref="Compact"/> releases growth slack. Under <see cref="VectorEncoding.Scalar8Bit"/> the rows are one-byte
/// codes learnt by <see cref="Train"/>, which must run before the first add.</para>
/// <para><b>Cost.</b> A search reads every stored row once, so its cost grows linearly with the count and the
/// dimension; a filter is checked per row before its distance is computed. A batch search is tiled across queries and
/// rows and runs in parallel.</para>
/// <para><b>Results.</b> Best first, ties by id. A batch returns exactly what single searches would: its candidates are
/// re-scored with the single-query kernel, and a query whose completeness cannot be proven is scanned singly. Under
/// 8-bit storage distances are to the decoded codes, unless re-scoring (<see cref="VectorIndexOptions.RescoreDepth"/>)
/// replaces the best candidates' distances with exact ones, read from memory or from an <see cref="IFullVectorSource"/>
/// (<see cref="VectorIndexOptions.FullVectors"/>).</para>
/// <para><b>Thread safety.</b> All members are thread-safe. Any number of searches run concurrently; training, adds and
/// removes are exclusive, so a search sees the index entirely before or entirely after each write. A batch search holds
/// the read lock one query at a time, or one tile of 96 queries on the float32 path (see <see cref="VectorIndex.SearchBatch"/>); <see cref="Compact"/> and
/// saving run beside searches, and writes wait for them.</para>
/// <para>See docs/choosing-an-index.md in the repository for when an exact scan is the right choice.</para>
/// </remarks>
public sealed partial class ExactIndex : VectorIndex
{
    // A batch works on this many queries at a time per thread, against row tiles of about TileBytes.
    private const int TiledQueryBlock = 96; // whole panels on every path (2, 8, 16 and 48 queries)
    private const int TileBytes = 256 * 1024;

    // Rows scored per kernel call in a single-query scan: the distances of one block live on the stack.
    private const int ScanBlock = 256;

    private readonly VectorBuffer _vectors;
    private readonly KernelPath _kernelPath;

    // 8-bit storage: the codes (null under float32) and their quantizer once trained. _vectors holds the rows under
    // float32, the full vectors under 8-bit storage with re-scoring from memory, and nothing (capacity 0) otherwise;
    // re-scoring from an external source reads _source.
    private readonly ExactIndexOptions _options;
    private readonly bool _keepsVectors = true;
    private readonly bool _readsExternally;
    private readonly CodeBuffer? _codes;
    private ScalarQuantizer? _scalar;
    private readonly IdColumn _ids;
    private float[] _squaredNorms;
    private int _batchFallbacks;

    /// <summary>Creates an empty exact index.</summary>
    /// <param name="dimension">Components per vector, at least 1.</param>
    /// <param name="metric">The distance metric.</param>
    /// <param name="options">Capacity, storage and re-scoring options; <see langword="null"/> for <see cref="ExactIndexOptions.Default"/>.</param>
    /// <exception cref="ArgumentOutOfRangeException"><paramref name="dimension"/> is not positive, or <paramref name="metric"/> is not defined.</exception>
    public ExactIndex(int dimension, DistanceMetric metric, ExactIndexOptions? options = null)
        : this(dimension, metric, options, KernelDispatch.Widest)
    {
    }

    /// <summary>Creates an empty exact index under 8-bit storage that re-scores from <paramref name="fullVectors"/>.</summary>
    /// <param name="dimension">Components per vector, at least 1.</param>
    /// <param name="metric">The distance metric.</param>
    /// <param name="options">Options with <see cref="VectorEncoding.Scalar8Bit"/> storage, a positive <see cref="VectorIndexOptions.RescoreDepth"/> and <see cref="VectorIndexOptions.FullVectors"/> = <see cref="FullVectorLocation.ExternalSource"/>.</param>
    /// <param name="fullVectors">The full vector of every id that will be added (not owned by the index).</param>
    /// <exception cref="ArgumentOutOfRangeException"><paramref name="dimension"/> is not positive, or <paramref name="metric"/> is not defined.</exception>
    /// <exception cref="ArgumentException">The source's dimension differs from <paramref name="dimension"/>.</exception>
    /// <exception cref="ArgumentNullException"><paramref name="options"/> or <paramref name="fullVectors"/> is <see langword="null"/>.</exception>
    /// <exception cref="InvalidOperationException">The options do not re-score from an external source.</exception>
    public ExactIndex(int dimension, DistanceMetric metric, ExactIndexOptions options, IFullVectorSource fullVectors)
        : this(dimension, metric, options ?? throw new ArgumentNullException(nameof(options)), KernelDispatch.Widest)
    {
        SourceRows.CheckAttach(fullVectors, dimension, _readsExternally);
        _source = fullVectors;
    }

    /// <summary>Creates an index whose kernels run no wider than <paramref name="kernelPath"/> (tests sweep every path).</summary>
    internal ExactIndex(int dimension, DistanceMetric metric, ExactIndexOptions? options, KernelPath kernelPath)
        : base(dimension, metric)
    {
        options ??= ExactIndexOptions.Default;
        _kernelPath = kernelPath;
        _options = options;
        int capacity = options.InitialCapacity;
        if (options.Encoding == VectorEncoding.Scalar8Bit)
        {
            _readsExternally = options.ReadsFullVectorsExternally;
            _keepsVectors = options.KeepsFullVectorsInMemory;
            _codes = new CodeBuffer(ScalarQuantizer.PaddedLength(dimension), capacity);
        }

        _vectors = new VectorBuffer(dimension, _keepsVectors ? capacity : 0);
        _ids = new IdColumn(capacity);
        _squaredNorms = KeepsSquaredNorms(metric, options.Encoding) ? new float[capacity] : [];
    }

    /// <summary>The options the index was built with.</summary>
    public ExactIndexOptions Options => _options;

    /// <inheritdoc/>
    private protected override VectorIndexOptions SharedOptions => _options;

    /// <inheritdoc/>
    private protected override string NotTrainedMessage => "The exact index stores 8-bit codes and is not trained: call Train with a sample of at least 1 vector (ideally covering the data's range) before adding or searching.";

    /// <inheritdoc/>
    public override int CodeBytesPerVector => _codes?.Dimension ?? Dimension * sizeof(float);

    /// <summary>
    /// Whether adds and searches may run: always under float32 storage; under 8-bit storage once <see cref="Train"/>
    /// has learnt the code ranges.
    /// </summary>
    public override bool IsTrained => _codes is null || Volatile.Read(ref _scalar) is not null;

    // Vectors (and 8-bit codes) at their reserved capacity, ids, norms, the code ranges, and the id lookup.
    private protected override long MemoryBytesLocked()
        => _vectors.Bytes + _ids.Bytes + ((long)_squaredNorms.Length * sizeof(float))
            + _slotOf.Bytes + (_codes?.Bytes ?? 0) + (_scalar is null ? 0 : 2L * _scalar.CodeBytes * sizeof(float));

    // The row, or under 8-bit storage without full vectors the decoded code (each component within half a quantization
    // step of the vector added when inside the trained range, clamped to the range otherwise).
    private protected override void CopyStoredLocked(int slot, Span<float> destination)
    {
        if (_keepsVectors)
        {
            _vectors.RowSpan(slot).CopyTo(destination);
        }
        else
        {
            _scalar!.Decode(_codes!.RowSpan(slot), destination);
        }
    }

    // Each removed row is filled with the last row, so the scanned range stays dense.
    private protected override void RemoveLocked(ReadOnlySpan<long> ids)
    {
        foreach (long id in ids)
        {
            _slotOf.Remove(id, out int slot);
            int last = _count - 1;
            if (slot != last)
            {
                if (_keepsVectors)
                {
                    _vectors.CopyRow(last, slot);
                }

                _codes?.CopyRow(last, slot);
                long moved = _ids[last];
                _ids[slot] = moved;
                if (_squaredNorms.Length > 0)
                {
                    _squaredNorms[slot] = _squaredNorms[last];
                }

                _slotOf[moved] = slot;
            }

            Volatile.Write(ref _count, last);
        }
    }

    /// <summary>Batch queries so far whose tiled candidates could not be proven complete and were scanned singly (for tests).</summary>
    internal int BatchFallbacks => Volatile.Read(ref _batchFallbacks);

    /// <inheritdoc/>
    /// <remarks>
    /// Removed rows leave no holes in an exact index, so this only releases the storage reserved beyond
    /// <see cref="VectorIndex.Count"/> vectors. The trimmed copies are made beside searches (writes wait) and swapped in
    /// a short exclusive step; a cancelled call changes nothing.
    /// </remarks>
    public override void Compact(IProgress<int>? progress = null, CancellationToken cancellationToken = default)
    {
        // The writer gate, held exclusively, keeps every write out, so the rows stay still while they are copied
        // without the write lock; only the swap takes that.
        using var gate = _writerGate.EnterWrite();
        ThrowIfDisposed();
        ThrowIfReadOnly();
        cancellationToken.ThrowIfCancellationRequested();
        int count = _count;
        (VectorBuffer? vectors, CodeBuffer? codes) = CopyRows(count, count);
        var ids = new IdColumn(count);
        try
        {
            _ids.CopyRowsTo(ids, count);
            float[] norms = _squaredNorms.Length > 0 ? _squaredNorms.AsSpan(0, count).ToArray() : _squaredNorms;
            var slotOf = new IdMap(count);
            for (int slot = 0; slot < count; slot++)
            {
                slotOf.Add(ids[slot], slot);
            }

            cancellationToken.ThrowIfCancellationRequested();
            SwapIn(vectors, codes, ids, norms, slotOf);
        }
        finally
        {
            // The old blocks after a swap; the unused copies after a cancellation.
            vectors?.Dispose();
            codes?.Dispose();
            ids.Dispose();
        }

        progress?.Report(count);
    }

    // Adds (and with `replace`, overwrites in place) a batch under the write lock, in one step: the rows are copied
    // after the token's last check, so the batch is all or nothing.
    private protected override int WriteBatch(ReadOnlySpan<long> ids, ReadOnlySpan<float> vectors, bool replace, IProgress<int>? progress, CancellationToken cancellationToken)
    {
        int replaced = 0;
        using (_lock.EnterWrite())
        {
            ThrowIfDisposed();
            ThrowIfReadOnly();
            ThrowIfNotTrained();
            int added = ids.Length;
            if (replace)
            {
                foreach (long id in ids)
                {
                    added -= _slotOf.ContainsKey(id) ? 1 : 0;
                }
            }
            else
            {
                _slotOf.CheckAbsent(ids, nameof(ids));
            }

            cancellationToken.ThrowIfCancellationRequested();
            int count = _count;
            EnsureCapacity(checked(count + added));
            _slotOf.EnsureCapacity(count + added);
            for (int r = 0; r < ids.Length; r++)
            {
                ReadOnlySpan<float> row = vectors.Slice(r * Dimension, Dimension);
                if (replace && _slotOf.TryGetValue(ids[r], out int slot))
                {
                    Store(slot, row);
                    replaced++;
                }
                else
                {
                    Store(count, row);
                    _ids[count] = ids[r];
                    _slotOf.Add(ids[r], count);
                    count++;
                }
            }

            // Searches wait for the write lock, so the new rows become visible all at once.
            Volatile.Write(ref _count, count);
        }

        progress?.Report(ids.Length);
        return replaced;
    }


    /// <summary>
    /// Under float32 encoding without a filter, blocks of queries are scored against cache-sized tiles of rows and the
    /// result is proven equal to single searches (see the class remarks); otherwise each query runs the single-query
    /// scan (and re-scoring), queries in parallel. Either way each block holds the read lock only while it runs, and
    /// reads the row count and the largest norm again under it.
    /// </summary>
    private protected override void SearchBatchBlocks(ReadOnlySpan<float> queries, BatchSearchResults results, SearchOptions options, IProgress<int>? progress, CancellationToken cancellationToken)
    {
        // A mapped index has no squared norms (derived data the file does not hold), so it scans query by query.
        if (_codes is not null || options.Filter is not null || IsMapped)
        {
            base.SearchBatchBlocks(queries, results, options, progress, cancellationToken);
            return;
        }

        var tiled = new TiledBatch(this, results);
        BatchSearch.RunBlocks(this, queries, results.QueryCount, TiledQueryBlock, options, progress, cancellationToken, () => new BatchScratch(this, results.K), tiled.Run);
    }

    /// <inheritdoc/>
    private protected override void ReleaseStorage()
    {
        _vectors.Dispose();
        _codes?.Dispose();
        _ids.Dispose();

        // After the buffers have forgotten the view.
        _mapping?.Dispose();
    }

    /// <inheritdoc/>
    private protected override int SearchLocked(ReadOnlySpan<float> q, Span<SearchHit> destination, SearchOptions options)
        => _codes is not null ? SearchCodesLocked(q, destination, options) : ScanLocked(q, destination, options.Filter);

    // Caller holds the read lock; q is validated (and unit length under cosine).
    private int ScanLocked(ReadOnlySpan<float> q, Span<SearchHit> destination, Func<long, bool>? filter)
    {
        if (_count == 0)
        {
            return 0;
        }

        Span<SearchHit> heap = destination[..Math.Min(destination.Length, _count)];
        var scan = new ScanAction<FloatScanRows>(this, ref MemoryMarshal.GetReference(q), heap, filter, new(_vectors, _kernelPath));
        int found = MetricDispatch.Run<ScanAction<FloatScanRows>, int>(Metric, ref scan);
        return TopK.SortBestFirst(heap, found);
    }

    /// <summary>One scan with the metric resolved.</summary>
    private ref struct ScanAction<TRows>(ExactIndex index, ref float query, Span<SearchHit> heap, Func<long, bool>? filter, TRows rows) : IMetricAction<int>
        where TRows : struct, IScanRows
    {
        private readonly ref float _query = ref query;
        private readonly Span<SearchHit> _heap = heap;

        public readonly int Run<TStep, TFinish>()
            where TStep : struct, IAccumulateStep
            where TFinish : struct, IDistanceFinish
            => index.Scan<TStep, TFinish, TRows>(ref _query, _heap, filter, rows);
    }

    // One pass over the rows (float32 vectors or 8-bit codes): the kernel scores a block of rows at a time, the bounded
    // heap keeps the best.
    private int Scan<TStep, TFinish, TRows>(ref float query, Span<SearchHit> heap, Func<long, bool>? filter, TRows rows)
        where TStep : struct, IAccumulateStep
        where TFinish : struct, IDistanceFinish
        where TRows : struct, IScanRows
    {
        int n = _count;
        IdColumn ids = _ids;
        int count = 0;
        if (filter is not null)
        {
            // The filter runs before the distance: rejected rows cost a predicate call, not a kernel call.
            float single = 0;
            for (int slot = 0; slot < n; slot++)
            {
                long id = ids[slot];
                if (filter(id))
                {
                    rows.Compute<TStep>(ref query, slot, 1, ref single);
                    TopK.Offer(heap, ref count, TFinish.Apply(single), id);
                }
            }

            return count;
        }

        Span<float> block = stackalloc float[ScanBlock];
        ref float distances = ref MemoryMarshal.GetReference(block);
        float bound = float.PositiveInfinity;
        for (int start = 0; start < n; start += ScanBlock)
        {
            int length = Math.Min(ScanBlock, n - start);
            rows.Compute<TStep>(ref query, start, length, ref distances);
            for (int j = 0; j < length; j++)
            {
                float distance = TFinish.Apply(Unsafe.Add(ref distances, j));
                if (distance <= bound)
                {
                    TopK.Offer(heap, ref count, distance, ids[start + j]);
                    bound = TopK.Bound(heap, count);
                }
            }
        }

        return count;
    }

    /// <summary>The rows a scan scores, a block at a time: the step-sums of the query with rows [start, start + count).</summary>
    private interface IScanRows
    {
        void Compute<TStep>(ref float query, int start, int count, ref float results)
            where TStep : struct, IAccumulateStep;
    }

    /// <summary>Float32 rows, on the one-against-many kernel (a block of one equals the single-row kernel, bit for bit).</summary>
    private readonly struct FloatScanRows(VectorBuffer vectors, KernelPath path) : IScanRows
    {
        [MethodImpl(MethodImplOptions.AggressiveInlining)]
        public void Compute<TStep>(ref float query, int start, int count, ref float results)
            where TStep : struct, IAccumulateStep
            => ManyKernel.Compute<TStep>(path, ref query, ref vectors.Row(start), vectors.Dimension, count, ref results);
    }

    /// <summary>8-bit codes, on the byte-code kernel; the query is padded to the code length.</summary>
    private readonly struct CodeScanRows(ScalarQuantizer scalar, CodeBuffer codes, KernelPath path) : IScanRows
    {
        [MethodImpl(MethodImplOptions.AggressiveInlining)]
        public void Compute<TStep>(ref float query, int start, int count, ref float results)
            where TStep : struct, IAccumulateStep
            => scalar.Compute<TStep>(path, ref query, ref codes.Row(start), count, ref results);
    }

    // Unit vectors under cosine; otherwise the largest stored ‖x‖², for the batch's rounding-error bound.
    private float LargestSquaredNorm()
    {
        if (Metric == DistanceMetric.Cosine)
        {
            return 1f;
        }

        float largest = 0f;
        foreach (float norm in _squaredNorms.AsSpan(0, _count))
        {
            largest = Math.Max(largest, norm);
        }

        return largest;
    }

    /// <inheritdoc/>
    private protected override bool HasRoomFor(int added) => IsReadOnly || ((long)Volatile.Read(ref _count) + added <= (_codes?.Capacity ?? _vectors.Capacity) && !IdMapMustGrow(added));

    /// <inheritdoc/>
    private protected override bool GrowRows(int added, IdMap? slotOf)
    {
        int count = _count;
        int capacity = _codes?.Capacity ?? _vectors.Capacity;
        long required = (long)count + added;
        if (required <= capacity || required > Array.MaxLength)
        {
            return false;
        }

        // The growth rule of RowBuffer.EnsureCapacity, so the buffers stay the size growing in place would give.
        int grown = (int)Math.Min(Array.MaxLength, Math.Max(required, capacity + ((long)capacity / 2)));
        (VectorBuffer? vectors, CodeBuffer? codes) = CopyRows(count, grown);
        var ids = new IdColumn(grown);
        try
        {
            _ids.CopyRowsTo(ids, count);

            // The rows to come are touched now, not by the first add to reach each page, under the write lock.
            vectors?.ClearRows(count, grown - count);
            codes?.ClearRows(count, grown - count);
            ids.ClearRows(count, grown - count);
            float[] norms = _squaredNorms;
            if (KeepsSquaredNorms(Metric, _options.Encoding))
            {
                norms = new float[grown];
                _squaredNorms.AsSpan(0, count).CopyTo(norms);
            }

            SwapIn(vectors, codes, ids, norms, slotOf);
        }
        finally
        {
            vectors?.Dispose();
            codes?.Dispose();
            ids.Dispose();
        }

        return true;
    }

    // New buffers of the given capacity holding the first count rows, made beside searches while the writer gate keeps
    // the rows still. Both or neither: a failed second allocation frees the first.
    private (VectorBuffer? Vectors, CodeBuffer? Codes) CopyRows(int count, int capacity)
    {
        VectorBuffer? vectors = null;
        CodeBuffer? codes = null;
        try
        {
            if (_keepsVectors)
            {
                vectors = new VectorBuffer(Dimension, capacity);
                _vectors.CopyRowsTo(vectors, count);
            }

            if (_codes is not null)
            {
                codes = new CodeBuffer(_codes.Dimension, capacity);
                _codes.CopyRowsTo(codes, count);
            }

            return (vectors, codes);
        }
        catch
        {
            vectors?.Dispose();
            codes?.Dispose();
            throw;
        }
    }

    // The short exclusive step after CopyRows: the buffers exchange blocks with the copies (freed by the caller) and the
    // arrays are replaced, so a search sees the old storage or the new, never a mix.
    private void SwapIn(VectorBuffer? vectors, CodeBuffer? codes, IdColumn ids, float[] norms, IdMap? slotOf)
    {
        using var write = _lock.EnterWrite();
        if (vectors is not null)
        {
            _vectors.Adopt(vectors);
        }

        if (codes is not null)
        {
            _codes!.Adopt(codes);
        }

        _ids.Adopt(ids);
        _squaredNorms = norms;
        if (slotOf is not null)
        {
            _slotOf = slotOf;
        }
    }

    private void EnsureCapacity(int required)
    {
        if (_keepsVectors)
        {
            _vectors.EnsureCapacity(required);
        }

        // Both buffers grow by the same rule from the same capacity, so they stay the same size.
        _codes?.EnsureCapacity(required);
        int capacity = _codes?.Capacity ?? _vectors.Capacity;
        if (_ids.Capacity < capacity)
        {
            _ids.Resize(capacity);
            if (KeepsSquaredNorms(Metric, _options.Encoding))
            {
                Array.Resize(ref _squaredNorms, capacity);
            }
        }
    }

    // Writes one validated vector into a slot's row (or code), normalised under cosine; caller holds the write lock
    // and maintains the ids.
    private void Store(int slot, ReadOnlySpan<float> vector)
    {
        if (_codes is not null)
        {
            StoreCode(slot, vector);
            return;
        }

        Span<float> row = _vectors.RowSpan(slot);
        if (Metric == DistanceMetric.Cosine)
        {
            VectorChecks.Normalize(vector, row, nameof(vector));
            return;
        }

        vector.CopyTo(row);
        _squaredNorms[slot] = PairKernel.Sum<DotStep>(_kernelPath, row, row);
    }

    /// <summary>One thread's buffers for a batch: row-tile distances, per-query candidate heaps, query norms.</summary>
    private sealed class BatchScratch
    {
        public BatchScratch(ExactIndex index, int k)
        {
            TileRows = Math.Max(PanelKernel.RowMultiple, TileBytes / (index.Dimension * sizeof(float)) / PanelKernel.RowMultiple * PanelKernel.RowMultiple);
            PackedQueries = new float[PanelKernel.PackedLength(index._kernelPath, TiledQueryBlock, index.Dimension)];

            // Candidates are selected with the tiled dot-product kernel, whose rounding differs from the single-query
            // kernel's; extra candidates, re-scored exactly, leave room for the error bound to prove the top k complete.
            // A block uses at most the rows there are when it runs (see Tiled).
            HeapSize = k + Math.Max(8, k / 2);
            Dots = new float[PanelKernel.PaddedQueries(index._kernelPath, TiledQueryBlock) * TileRows];
            Heaps = new SearchHit[TiledQueryBlock * HeapSize];
            Counts = new int[TiledQueryBlock];
            QuerySquaredNorms = new float[TiledQueryBlock];
        }

        public int TileRows { get; }

        public int HeapSize { get; }

        /// <summary>Row-tile dot products, one output row per stored row, one column per (padded) query.</summary>
        public float[] Dots { get; }

        /// <summary>The block's queries packed into the panel kernel's panels.</summary>
        public float[] PackedQueries { get; }

        public SearchHit[] Heaps { get; }

        public int[] Counts { get; }

        public float[] QuerySquaredNorms { get; }
    }

    /// <summary>The shared state of one tiled batch search (float32 rows, no filter), and the work of one block of queries.</summary>
    private sealed unsafe class TiledBatch(ExactIndex index, BatchSearchResults results)
    {
        public void Run(nint queries, int first, int count, BatchScratch scratch)
        {
            var action = new BlockAction(this, first, count, (float*)queries + ((nint)first * index.Dimension), scratch);
            MetricDispatch.Run<BlockAction, bool>(index.Metric, ref action);
        }

        private readonly struct BlockAction(TiledBatch batch, int first, int count, float* q, BatchScratch scratch) : IMetricAction<bool>
        {
            public bool Run<TStep, TFinish>()
                where TStep : struct, IAccumulateStep
                where TFinish : struct, IDistanceFinish
            {
                batch.Tiled<TStep, TFinish>(first, count, q, scratch);
                return true;
            }
        }

        private void Tiled<TStep, TFinish>(int first, int count, float* q, BatchScratch scratch)
            where TStep : struct, IAccumulateStep
            where TFinish : struct, IDistanceFinish
        {
            int d = index.Dimension;
            // The block holds the read lock; rows may have changed since the previous block.
            int n = index._count;
            int heapSize = Math.Min(n, scratch.HeapSize);
            float largestSquaredNorm = index.LargestSquaredNorm();
            int tileRows = scratch.TileRows;
            IdColumn ids = index._ids;
            float[] rowNorms = index._squaredNorms;
            bool withNorms = rowNorms.Length > 0;
            Span<SearchHit> heaps = scratch.Heaps;
            Span<int> counts = scratch.Counts.AsSpan(0, count);
            counts.Clear();
            for (int i = 0; i < count; i++)
            {
                var query = new ReadOnlySpan<float>(q + ((nint)i * d), d);
                scratch.QuerySquaredNorms[i] = withNorms ? PairKernel.Sum<DotStep>(index._kernelPath, query, query) : 1f;
            }

            // Queries packed once per block; each row tile is read where it is stored, scored against every query in
            // registers, and selected from while its dot products are still in cache.
            KernelPath path = index._kernelPath;
            PanelKernel.Pack(path, new ReadOnlySpan<float>(q, count * d), count, d, scratch.PackedQueries);
            int stride = PanelKernel.PaddedQueries(path, count);
            ref float packed = ref MemoryMarshal.GetArrayDataReference(scratch.PackedQueries);
            ref float dots = ref MemoryMarshal.GetArrayDataReference(scratch.Dots);
            for (int start = 0; start < n; start += tileRows)
            {
                int rows = Math.Min(tileRows, n - start);
                PanelKernel.Compute(path, ref packed, count, ref index._vectors.Row(start), rows, d, ref dots, stride);
                for (int i = 0; i < count; i++)
                {
                    Span<SearchHit> heap = heaps.Slice(i * heapSize, heapSize);
                    ref int found = ref counts[i];
                    float queryNorm = scratch.QuerySquaredNorms[i];
                    float bound = TopK.Bound(heap, found);
                    ref float column = ref Unsafe.Add(ref dots, i);
                    for (int j = 0; j < rows; j++)
                    {
                        float distance = TFinish.FromDot(Unsafe.Add(ref column, (nint)j * stride), queryNorm, withNorms ? rowNorms[start + j] : 1f);
                        if (distance <= bound)
                        {
                            TopK.Offer(heap, ref found, distance, ids[start + j]);
                            bound = TopK.Bound(heap, found);
                        }
                    }
                }
            }

            double gamma = RelativeErrorBound(index._kernelPath, d);
            int k = results.K;
            for (int i = 0; i < count; i++)
            {
                Span<SearchHit> heap = heaps.Slice(i * heapSize, counts[i]);
                heap.Sort();
                ref float query = ref *(q + ((nint)i * d));

                // Complete when every row was a candidate, or when the k-th candidate beats every row left out by more
                // than the two kernels can disagree: then no row outside could enter the single search's top k.
                bool complete = heap.Length < heapSize || heapSize >= n
                    || heap[k - 1].Distance + TFinish.Margin(gamma, scratch.QuerySquaredNorms[i], largestSquaredNorm) < heap[^1].Distance;
                if (!complete)
                {
                    Interlocked.Increment(ref index._batchFallbacks);
                    var single = new ReadOnlySpan<float>(q + ((nint)i * d), d);
                    results.SetCount(first + i, index.ScanLocked(single, results.Slots(first + i), null));
                    continue;
                }

                // Re-score the candidates with the single-query kernel, then keep the best k.
                for (int c = 0; c < heap.Length; c++)
                {
                    long id = heap[c].Id;
                    int slot = index._slotOf[id];
                    heap[c] = new SearchHit(id, TFinish.Apply(ManyKernel.One<TStep>(index._kernelPath, ref query, ref index._vectors.Row(slot), d)));
                }

                heap.Sort();
                int keep = Math.Min(k, heap.Length);
                heap[..keep].CopyTo(results.Slots(first + i));
                results.SetCount(first + i, keep);
            }
        }

        // γ for one float sum in either kernel, doubled for safety. The single-query kernel chains about d / width
        // products per lane, then adds the lanes and partial sums (at most width + 4 more roundings); the panel kernel
        // chains at most one component block, then adds one partial sum per block (PanelKernel.ChainLength).
        private static double RelativeErrorBound(KernelPath widest, int dimension)
        {
            int width = KernelDispatch.For(dimension, widest) switch
            {
                KernelPath.Vector512 => 16,
                KernelPath.Vector256 => 8,
                KernelPath.Vector128 => 4,
                _ => 1,
            };
            int roundings = Math.Max((dimension / width) + width + 6, PanelKernel.ChainLength(dimension) + 2);
            return 2.0 * roundings * Float32Rounding.Unit;
        }
    }
}
