using System.Buffers;
using System.Runtime.InteropServices;
using VectorKit.Clustering;
using VectorKit.Distance;
using VectorKit.Distance.Kernels;
using VectorKit.Quantization;
using VectorKit.Internal;

namespace VectorKit.Indexes.InvertedFile;

/// <summary>
/// An inverted-file index: k-means splits the space into <see cref="InvertedFileOptions.ListCount"/> cells, each
/// vector is stored in the list of its nearest centroid, and a search scans only the lists of the query's nearest
/// centroids. Lists hold float32 vectors, product-quantization codes or 8-bit scalar codes
/// (<see cref="VectorIndexOptions.Encoding"/>), optionally with the full vectors kept for exact re-scoring. Product codes
/// come in two layouts (<see cref="InvertedFileOptions.ProductCodeLayout"/>): one byte per sub-space scanned by table
/// look-ups, or four bits per sub-space in blocks of 32 scanned in SIMD registers (the fast scan).
/// </summary>
/// <remarks>
/// <para><b>Training first.</b> <see cref="Train"/> learns the centroids (and the residual quantizer) from a sample;
/// adding or searching before that throws <see cref="IndexNotTrainedException"/>. Lists are assigned and probed by
/// squared Euclidean distance under every metric (under cosine the vectors are unit length, where that ranks like the
/// cosine). Compressed codes encode the residual <c>x − centroid</c>.</para>
/// <para><b>Cost.</b> A search compares the query with every centroid, then scans only the lists of the
/// <see cref="InvertedFileOptions.SearchWidth"/> nearest ones: more probes find more true neighbours and cost
/// proportionally more. Removing a vector moves the last entry of its list into its place, so lists never hold holes.</para>
/// <para><b>Results.</b> Best first, ties by id. Float32 lists report the same distances as <see cref="Exact.ExactIndex"/>;
/// compressed lists report the distance to the code's reconstruction, unless re-scoring
/// (<see cref="VectorIndexOptions.RescoreDepth"/>) replaces them with exact ones, read from memory or from an
/// <see cref="IFullVectorSource"/> (<see cref="VectorIndexOptions.FullVectors"/>). A filter is checked while the probed
/// lists are scanned, so fewer than k results come back when they hold fewer than k passing items.</para>
/// <para><b>Thread safety.</b> All members are thread-safe. Any number of searches run concurrently; training, adds
/// and removes are exclusive. A batch search holds the read lock one query at a time (see
/// <see cref="VectorIndex.SearchBatch"/>); <see cref="Compact"/> and saving run beside searches, and writes wait for them.</para>
/// <para><b>Persistence.</b> <c>VectorKit.Persistence.IndexFile</c> saves and loads the index, trained or not; an
/// external full-vector source is neither saved nor disposed: attach it again after loading. <c>IndexFile.OpenMapped</c>
/// opens a saved file read-only in place instead (<see cref="IsMapped"/>): lists, ids and full vectors stay in the
/// mapped file.</para>
/// </remarks>
public sealed partial class InvertedFileIndex : VectorIndex
{
    // Bulk adds work in chunks so the temporary copies stay small next to the index.
    private const int AddChunk = 65_536;

    private readonly InvertedFileOptions _options;
    private readonly KernelPath _kernelPath;
    private readonly int _codeBytes;

    // Trained state: centroids (ListCount × Dimension), and the residual quantizer under compressed storage.
    private float[] _centroids = [];
    private ProductQuantizer? _product;

    // Under a rotated product quantizer, R·c for every centroid (derived): a search rotates the query once and takes
    // each probed list's residual as R·q − R·c, O(d) per list, instead of rotating q − c per list, O(d²).
    private float[] _rotatedCentroids = [];
    private ScalarQuantizer? _scalar;

    // Under the four-bit fast-scan layout, the quantizer of the residuals (and _product stays null); lists then hold
    // FastScanKernel blocks of 32 entries instead of one code after another.
    private FourBitQuantizer? _fourBit;

    // Derived under the fast-scan layout: per list its table terms ‖c_{m,j}‖² + 2 (R·centroid)_m · c_{m,j} (lists × 2 ×
    // code bytes × 16), so a squared-distance probe adds the query's terms instead of filling a table (FillListTerms).
    private float[] _listTerms = [];
    private bool _trained;

    // Lists: codes (capacity × code bytes), the slot of each entry, and the entries in use.
    private readonly byte[][] _listCodes;
    private readonly int[][] _listSlots;
    private readonly int[] _listCounts;

    // Per slot (dense, 0.._count): id, list, position in the list; and the full vector when kept.
    private long[] _ids = [];
    private int[] _listOf = [];
    private int[] _positionOf = [];
    private readonly VectorBuffer? _full;

    /// <summary>Creates an empty, untrained inverted-file index.</summary>
    /// <param name="dimension">Components per vector, at least 1.</param>
    /// <param name="metric">The distance metric.</param>
    /// <param name="options">Lists, probes, storage, re-scoring, training; <see langword="null"/> for <see cref="InvertedFileOptions.Default"/>.</param>
    /// <exception cref="ArgumentOutOfRangeException"><paramref name="dimension"/> is not positive, or <paramref name="metric"/> is not defined.</exception>
    /// <exception cref="ArgumentException">Under product codes, <see cref="InvertedFileOptions.ProductCodeBytes"/> does not divide the dimension (the message lists the divisors).</exception>
    public InvertedFileIndex(int dimension, DistanceMetric metric, InvertedFileOptions? options = null)
        : this(dimension, metric, options, KernelDispatch.Widest)
    {
    }

    /// <summary>Creates an empty, untrained inverted-file index that re-scores from <paramref name="fullVectors"/>.</summary>
    /// <param name="dimension">Components per vector, at least 1.</param>
    /// <param name="metric">The distance metric.</param>
    /// <param name="options">Options with compressed storage, a positive <see cref="VectorIndexOptions.RescoreDepth"/> and <see cref="VectorIndexOptions.FullVectors"/> = <see cref="FullVectorLocation.ExternalSource"/>.</param>
    /// <param name="fullVectors">The full vector of every id that will be added (not owned by the index).</param>
    /// <exception cref="ArgumentOutOfRangeException"><paramref name="dimension"/> is not positive, or <paramref name="metric"/> is not defined.</exception>
    /// <exception cref="ArgumentException">The source's dimension differs, or the product code size does not divide the dimension.</exception>
    /// <exception cref="ArgumentNullException"><paramref name="options"/> or <paramref name="fullVectors"/> is <see langword="null"/>.</exception>
    /// <exception cref="InvalidOperationException">The options do not re-score from an external source.</exception>
    public InvertedFileIndex(int dimension, DistanceMetric metric, InvertedFileOptions options, IFullVectorSource fullVectors)
        : this(dimension, metric, options ?? throw new ArgumentNullException(nameof(options)), KernelDispatch.Widest)
    {
        SourceRows.CheckAttach(fullVectors, dimension, _options.ReadsFullVectorsExternally);
        _source = fullVectors;
    }

    /// <summary>Creates an index whose kernels run no wider than <paramref name="kernelPath"/> (tests sweep every path).</summary>
    internal InvertedFileIndex(int dimension, DistanceMetric metric, InvertedFileOptions? options, KernelPath kernelPath)
        : this(dimension, metric, options, kernelPath, null)
    {
    }

    // A loader hands over the full vectors it read (the buffer is then owned by the index).
    private InvertedFileIndex(int dimension, DistanceMetric metric, InvertedFileOptions? options, KernelPath kernelPath, VectorBuffer? loadedFull)
        : base(dimension, metric)
    {
        options ??= InvertedFileOptions.Default;
        if (options.UsesFastScan)
        {
            FourBitQuantizer.CheckCodeBytes(options.ProductCodeBytes, dimension, nameof(options));
        }
        else if (options.Encoding == VectorEncoding.ProductCodes)
        {
            ProductQuantizer.CheckCodeBytes(options.ProductCodeBytes, dimension, nameof(options));
        }

        _options = options;
        _kernelPath = kernelPath;
        _codeBytes = options.Encoding switch
        {
            VectorEncoding.Float32 => checked(dimension * sizeof(float)),
            VectorEncoding.ProductCodes => options.ProductCodeBytes,
            _ => ScalarQuantizer.PaddedLength(dimension),
        };
        int lists = options.ListCount;
        _listCodes = new byte[lists][];
        _listSlots = new int[lists][];
        _listCounts = new int[lists];
        Array.Fill(_listCodes, []);
        Array.Fill(_listSlots, []);
        if (options.KeepsFullVectorsInMemory)
        {
            _full = loadedFull ?? new VectorBuffer(dimension, 0);
        }
    }

    /// <summary>The options the index was created with.</summary>
    public InvertedFileOptions Options => _options;

    /// <inheritdoc/>
    private protected override VectorIndexOptions SharedOptions => _options;

    /// <inheritdoc/>
    private protected override (int Max, int Default, bool CoversDepth) WidthKnob => (_options.ListCount, _options.SearchWidth, false);

    /// <inheritdoc/>
    private protected override string NotTrainedMessage
        => $"The inverted-file index is not trained: call Train with a sample of at least {(_options.Encoding == VectorEncoding.ProductCodes ? Math.Max(_options.ListCount, ProductQuantizer.CodewordsPerSubspace) : _options.ListCount)} vectors before adding or searching.";

    /// <summary>Whether <see cref="Train"/> has run; adds and searches need it.</summary>
    public override bool IsTrained => Volatile.Read(ref _trained);

    /// <summary>
    /// Bytes a search reads per stored vector in the lists: 4 × dimension for float32, the code size for product
    /// codes, the dimension rounded up to 16 for 8-bit codes. Full vectors kept for re-scoring are not counted here
    /// (they are read only for the few candidates re-scored); <see cref="VectorIndex.MemoryBytes"/> counts them.
    /// </summary>
    public override int CodeBytesPerVector => _codeBytes;

    // List codes and slot numbers at their reserved capacity, per-slot id, list and position, the full vectors when
    // kept, the centroids and codebooks (and a product-code rotation with the rotated centroids), and the id lookup.
    private protected override long MemoryBytesLocked()
    {
        long bytes = (long)_centroids.Length * sizeof(float);
        for (int l = 0; l < _listCodes.Length; l++)
        {
            bytes += _listCodes[l].Length + ((long)_listSlots[l].Length * sizeof(int));
        }

        bytes += (long)_ids.Length * (sizeof(long) + sizeof(int) + sizeof(int));
        bytes += _full?.Bytes ?? 0;
        bytes += _product is null ? 0 : ((2L * _product.Codewords.Length) + _product.Rotation.Length) * sizeof(float);
        bytes += _fourBit is null ? 0 : ((2L * _fourBit.Codewords.Length) + _fourBit.Rotation.Length + _listTerms.Length) * sizeof(float);
        bytes += (long)_rotatedCentroids.Length * sizeof(float);
        bytes += _scalar is null ? 0 : 2L * _scalar.CodeBytes * sizeof(float);
        bytes += _slotOf.Bytes;
        bytes += _mapped?.Bytes ?? 0;
        return bytes;
    }

    /// <summary>A copy of the list centroids, row after row (empty until trained).</summary>
    /// <returns>A new array of <see cref="InvertedFileOptions.ListCount"/> × <see cref="VectorIndex.Dimension"/> components.</returns>
    /// <exception cref="ObjectDisposedException">The index was disposed.</exception>
    public float[] GetCentroids()
    {
        using var read = _lock.EnterRead();
        ThrowIfDisposed();
        return (float[])_centroids.Clone();
    }

    /// <summary>
    /// Learns the list centroids by k-means on <paramref name="sample"/> (at most <see cref="InvertedFileOptions.SampleSize"/>
    /// rows of it), and under compressed storage the quantizer of the residuals from them.
    /// </summary>
    /// <param name="sample">Training rows, row after row: at least <see cref="InvertedFileOptions.ListCount"/> rows (and 256 under product codes) of finite components. They are not added to the index.</param>
    /// <param name="progress">Optional; receives the stage and the work done.</param>
    /// <param name="cancellationToken">Stops training between steps; a cancelled training leaves the index as it was.</param>
    /// <exception cref="ArgumentException">The sample is not a multiple of the dimension, has too few rows (the message names the minimum), a non-finite component, or a zero row under cosine.</exception>
    /// <exception cref="InvalidOperationException">The index already holds vectors; their codes depend on the current training.</exception>
    /// <exception cref="OperationCanceledException">The token was cancelled.</exception>
    /// <exception cref="ObjectDisposedException">The index was disposed.</exception>
    public override void Train(ReadOnlySpan<float> sample, IProgress<IndexTrainingProgress>? progress = null, CancellationToken cancellationToken = default)
    {
        int d = Dimension;
        if (sample.Length % d != 0)
        {
            ThrowHelper.ThrowArgument(nameof(sample), $"sample has {sample.Length} components, not a multiple of the index dimension {d}.");
        }

        int n = sample.Length / d;
        int lists = _options.ListCount;
        int minimum = _options.Encoding == VectorEncoding.ProductCodes ? Math.Max(lists, ProductQuantizer.CodewordsPerSubspace) : lists;
        if (n < minimum)
        {
            string why = minimum == lists ? $"an inverted file with {lists} lists" : $"product codes (256 codewords per sub-space) with {lists} lists";
            ThrowHelper.ThrowArgument(nameof(sample), $"sample has {n} rows; {why} needs at least {minimum} training rows.");
        }

        VectorChecks.CheckFinite(sample, nameof(sample), 0, d);
        if (Metric == DistanceMetric.Cosine)
        {
            sample = VectorChecks.NormalizedRows(sample, d, nameof(sample), cancellationToken);
        }

        using var gate = _writerGate.EnterRead();
        _lock.EnterWriteLock();
        try
        {
            ThrowIfDisposed();
            ThrowIfReadOnly();
            if (_count > 0)
            {
                throw new InvalidOperationException($"The index holds {_count} vectors, whose codes depend on the current training; train before adding, or build a new index.");
            }

            var kmeansOptions = new KMeansOptions
            {
                ClusterCount = lists,
                MaxIterations = _options.MaxIterations,
                SampleSize = _options.EffectiveSampleSize,
                Seed = _options.Seed,
                MaxDegreeOfParallelism = _options.EffectiveParallelism,
            };
            IProgress<KMeansProgress>? forward = progress is null ? null : new KMeansForward(progress);
            KMeansResult coarse = KMeans.Train(sample, d, kmeansOptions, forward, cancellationToken, _kernelPath);
            ProductQuantizer? product = null;
            ScalarQuantizer? scalar = null;
            FourBitQuantizer? fourBit = null;
            if (_options.Encoding != VectorEncoding.Float32)
            {
                float[] residuals = Residuals(sample, coarse, _options.Seed, cancellationToken);
                if (_options.UsesFastScan)
                {
                    IProgress<int>? subspaces = progress is null ? null : new SubspaceForward(progress, 2 * _options.ProductCodeBytes);
                    fourBit = FourBitQuantizer.Train(residuals, d, _options.ProductCodeBytes, _options.ProductCodeRotation, _options.MaxIterations, _options.Seed, _options.EffectiveParallelism, subspaces, cancellationToken);
                }
                else if (_options.Encoding == VectorEncoding.ProductCodes)
                {
                    var productOptions = new ProductQuantizerOptions
                    {
                        CodeBytes = _options.ProductCodeBytes,
                        MaxIterations = _options.MaxIterations,
                        Seed = _options.Seed,
                        MaxDegreeOfParallelism = _options.EffectiveParallelism,
                        Rotation = _options.ProductCodeRotation,
                    };
                    IProgress<int>? subspaces = progress is null ? null : new SubspaceForward(progress, _options.ProductCodeBytes);
                    product = ProductQuantizer.Train(residuals, d, productOptions, subspaces, cancellationToken);
                }
                else
                {
                    scalar = ScalarQuantizer.Train(residuals, d);
                    progress?.Report(new IndexTrainingProgress(IndexTrainingStage.TrainingQuantizer, 1, 1));
                }
            }

            _centroids = coarse.CentroidArray;
            _rotatedCentroids = RotatedCentroids(_centroids, product, fourBit);
            _product = product;
            _fourBit = fourBit;
            _listTerms = ListTerms(_centroids, _rotatedCentroids, fourBit);
            _scalar = scalar;
            Volatile.Write(ref _trained, true);
        }
        finally
        {
            _lock.ExitWriteLock();
        }
    }

    // The list entry: float32 as stored, the kept full vector, or the decoded code plus its list's centroid.
    private protected override void CopyStoredLocked(int slot, Span<float> destination)
    {
        int d = Dimension;
        (int list, int position) = Locate(slot);
        if (_fourBit is not null && _full is null)
        {
            using var scratch = ScratchRental<float>.Rent(d);
            Span<byte> packed = _codeBytes <= 512 ? stackalloc byte[_codeBytes] : new byte[_codeBytes];
            FastScanKernel.Get(ListCodes(list), _codeBytes, position, packed);
            _fourBit.Decode(packed, destination, scratch.Span);

            AddCentroid(list, destination);
            return;
        }

        ReadOnlySpan<byte> code = _fourBit is not null ? default : ListCodes(list).Slice(position * _codeBytes, _codeBytes);
        if (_options.Encoding == VectorEncoding.Float32)
        {
            MemoryMarshal.Cast<byte, float>(code).CopyTo(destination);
            return;
        }

        if (_full is not null)
        {
            _full.RowSpan(slot).CopyTo(destination);
            return;
        }

        if (_product is not null)
        {
            _product.Decode(code, destination);
        }
        else
        {
            _scalar!.Decode(code, destination);
        }

        AddCentroid(list, destination);
    }

    private void AddCentroid(int list, Span<float> destination)
    {
        int d = Dimension;
        ReadOnlySpan<float> centroid = _centroids.AsSpan(list * d, d);
        for (int j = 0; j < d; j++)
        {
            destination[j] += centroid[j];
        }
    }

    // Bytes a list of `entries` takes: one code after another, or whole fast-scan blocks.
    private long ListCodeBytes(int entries)
        => _options.UsesFastScan ? FastScanKernel.ListBytes(entries, _codeBytes) : (long)entries * _codeBytes;

    // Moves the code of entry `from` over entry `to` in a list's codes.
    private void MoveEntry(byte[] codes, int from, int to)
    {
        if (_options.UsesFastScan)
        {
            Span<byte> code = _codeBytes <= 512 ? stackalloc byte[_codeBytes] : new byte[_codeBytes];
            FastScanKernel.Get(codes, _codeBytes, from, code);
            FastScanKernel.Put(codes, _codeBytes, to, code);
        }
        else
        {
            codes.AsSpan(from * _codeBytes, _codeBytes).CopyTo(codes.AsSpan(to * _codeBytes, _codeBytes));
        }
    }

    private protected override void RemoveLocked(ReadOnlySpan<long> ids)
    {
        foreach (long id in ids)
        {
            RemoveOneLocked(id);
        }
    }

    /// <inheritdoc/>
    /// <remarks>
    /// Removed entries leave no holes in the lists, so this releases the storage reserved beyond the vectors held (list
    /// growth slack, slot arrays, id lookup). The trimmed copies are made beside searches (writes wait) and swapped in a
    /// short exclusive step; a cancelled call changes nothing.
    /// </remarks>
    public override void Compact(IProgress<int>? progress = null, CancellationToken cancellationToken = default)
    {
        // The writer gate, held exclusively, keeps every write out, so the lists stay still while they are copied
        // without the write lock; only the swap takes that.
        using var gate = _writerGate.EnterWrite();
        ThrowIfDisposed();
        ThrowIfReadOnly();
        cancellationToken.ThrowIfCancellationRequested();
        int lists = _listCounts.Length;
        int count = _count;
        var slots = new int[lists][];
        var codes = new byte[lists][];
        for (int list = 0; list < lists; list++)
        {
            // A list without slack is kept as it is: copying it would only make garbage for the collector, whose
            // pauses stop searches too.
            int length = _listCounts[list];
            int codeBytes = checked((int)ListCodeBytes(length));
            slots[list] = _listSlots[list].Length == length ? _listSlots[list] : _listSlots[list].AsSpan(0, length).ToArray();
            codes[list] = _listCodes[list].Length == codeBytes ? _listCodes[list] : _listCodes[list].AsSpan(0, codeBytes).ToArray();
        }

        long[] ids = _ids.Length == count ? _ids : _ids.AsSpan(0, count).ToArray();
        int[] listOf = _listOf.Length == count ? _listOf : _listOf.AsSpan(0, count).ToArray();
        int[] positionOf = _positionOf.Length == count ? _positionOf : _positionOf.AsSpan(0, count).ToArray();
        var slotOf = new IdMap(count);
        for (int slot = 0; slot < count; slot++)
        {
            slotOf.Add(ids[slot], slot);
        }

        VectorBuffer? full = _full is null ? null : new VectorBuffer(Dimension, count);
        try
        {
            _full?.CopyRowsTo(full!, count);
            cancellationToken.ThrowIfCancellationRequested();
            using (_lock.EnterWrite())
            {
                for (int list = 0; list < lists; list++)
                {
                    _listSlots[list] = slots[list];
                    _listCodes[list] = codes[list];
                }

                _ids = ids;
                _listOf = listOf;
                _positionOf = positionOf;
                _slotOf = slotOf;
                if (full is not null)
                {
                    _full!.Adopt(full);
                }
            }
        }
        finally
        {
            // The old block after a swap; the unused copy after a cancellation.
            full?.Dispose();
        }

        progress?.Report(count);
    }

    // Caller holds the write lock; the id is present. Fills the holes it leaves with last entries, so lists and slots stay dense.
    private void RemoveOneLocked(long id)
    {
        _slotOf.Remove(id, out int slot);
        int list = _listOf[slot];
        int position = _positionOf[slot];
        int lastPosition = _listCounts[list] - 1;
        if (position != lastPosition)
        {
            int moved = _listSlots[list][lastPosition];
            MoveEntry(_listCodes[list], lastPosition, position);
            _listSlots[list][position] = moved;
            _positionOf[moved] = position;
        }

        _listCounts[list] = lastPosition;
        int lastSlot = _count - 1;
        if (slot != lastSlot)
        {
            long movedId = _ids[lastSlot];
            _ids[slot] = movedId;
            _listOf[slot] = _listOf[lastSlot];
            _positionOf[slot] = _positionOf[lastSlot];
            _listSlots[_listOf[slot]][_positionOf[slot]] = slot;
            _full?.CopyRow(lastSlot, slot);
            _slotOf[movedId] = slot;
        }

        Volatile.Write(ref _count, lastSlot);
    }

    /// <summary>The number of vectors in each list (for diagnostics and tests).</summary>
    /// <returns>A new array of <see cref="InvertedFileOptions.ListCount"/> counts.</returns>
    public int[] ListLengths()
    {
        _lock.EnterReadLock();
        try
        {
            return (int[])_listCounts.Clone();
        }
        finally
        {
            _lock.ExitReadLock();
        }
    }

    /// <inheritdoc/>
    private protected override void ReleaseStorage()
    {
        _full?.Dispose();
        for (int l = 0; l < _listCodes.Length; l++)
        {
            _listCodes[l] = [];
            _listSlots[l] = [];
            _listCounts[l] = 0;
        }

        // After the buffers have forgotten the view.
        _mapped = null;
        _mapping?.Dispose();
    }

    // Adds (and with `replace`, replaces) a validated batch. Rows are assigned to lists (and a batch of one chunk is
    // encoded) before the write lock, beside searches, against the training of that moment; under the lock the work is
    // redone only if a training landed in between. Cancellation is honoured only while rows are assigned, before the
    // first write, so a batch is all or nothing. Returns how many were replaced.
    private protected override unsafe int WriteBatch(ReadOnlySpan<long> ids, ReadOnlySpan<float> vectors, bool replace, IProgress<int>? progress, CancellationToken cancellationToken)
    {
        int d = Dimension;
        int replaced = 0;
        int total = ids.Length;

        // The chunk buffers are rented: a streamed build adds thousands of batches, and fresh large arrays per batch
        // pile up as uncollected large-object garbage between full collections.
        int chunkRows = Math.Min(AddChunk, Math.Max(1, total));
        bool oneChunk = total <= chunkRows;
        float[] rows = ArrayPool<float>.Shared.Rent(chunkRows * d);
        int[] labels = ArrayPool<int>.Shared.Rent(total);
        float[] distances = ArrayPool<float>.Shared.Rent(chunkRows);
        byte[] codes = ArrayPool<byte>.Shared.Rent(chunkRows * _codeBytes);
        try
        {
            float[]? assignedWith = null;
            List<ListGrowth>? grown = null;
            long copiedAfter = -1;
            if (Volatile.Read(ref _trained))
            {
                assignedWith = _centroids;
                AssignRows(vectors, total, chunkRows, rows, labels, distances, codes, oneChunk, cancellationToken);
                copiedAfter = _lock.WritesCompleted;
                grown = GrownListsFor(labels.AsSpan(0, total));
                if (grown is not null)
                {
                    AfterListsCopied?.Invoke();
                }
            }

            _lock.EnterWriteLock();
            try
            {
                ThrowIfDisposed();
                ThrowIfReadOnly();
                ThrowIfNotTrained();
                if (!replace)
                {
                    _slotOf.CheckAbsent(ids, nameof(ids));
                }

                EnsureSlotCapacity(checked(_count + total));
                _slotOf.EnsureCapacity(_count + total);
                if (!ReferenceEquals(assignedWith, _centroids))
                {
                    AssignRows(vectors, total, chunkRows, rows, labels, distances, codes, oneChunk, cancellationToken);
                }

                // The lists copied before the lock are current if no write step ended since (and this one removes none).
                bool copiesCurrent = _lock.WritesCompleted == copiedAfter;

                // Nothing is written before this point, and nothing after it checks the token.
                if (replace)
                {
                    foreach (long id in ids)
                    {
                        if (_slotOf.ContainsKey(id))
                        {
                            RemoveOneLocked(id);
                            replaced++;
                        }
                    }
                }

                GrowLists(labels.AsSpan(0, total), grown, copiesCurrent && replaced == 0);
                if (oneChunk)
                {
                    Append(ids, rows, labels.AsSpan(0, total), codes, total);
                }
                else
                {
                    for (int start = 0; start < total; start += chunkRows)
                    {
                        int n = Math.Min(chunkRows, total - start);
                        Prepare(vectors.Slice(start * d, n * d), rows);
                        Encode(rows, labels.AsSpan(start, n), n, codes);
                        Append(ids.Slice(start, n), rows, labels.AsSpan(start, n), codes, n);
                    }
                }
            }
            finally
            {
                _lock.ExitWriteLock();
            }
        }
        finally
        {
            ArrayPool<float>.Shared.Return(rows);
            ArrayPool<int>.Shared.Return(labels);
            ArrayPool<float>.Shared.Return(distances);
            ArrayPool<byte>.Shared.Return(codes);
        }

        progress?.Report(ids.Length);
        return replaced;
    }

    // Assigns every row of the batch to its list, chunk by chunk (temporary copies stay small); a batch of one chunk
    // is also prepared and encoded, ready to append. Reads only the training (centroids and quantizer).
    private unsafe void AssignRows(ReadOnlySpan<float> vectors, int total, int chunkRows, float[] rows, int[] labels, float[] distances, byte[] codes, bool oneChunk, CancellationToken cancellationToken)
    {
        int d = Dimension;
        for (int start = 0; start < total; start += chunkRows)
        {
            int n = Math.Min(chunkRows, total - start);
            Prepare(vectors.Slice(start * d, n * d), rows);
            fixed (float* pointer = rows)
            {
                NearestCentroid.Assign(_kernelPath, pointer, n, _centroids, _options.ListCount, d, labels.AsSpan(start, n), distances.AsSpan(0, n), _options.EffectiveParallelism, cancellationToken);
            }
        }

        if (oneChunk)
        {
            Encode(rows, labels.AsSpan(0, total), total, codes);
        }
    }

    // The rows as stored: copied, or scaled to unit length under cosine.
    private void Prepare(ReadOnlySpan<float> source, float[] rows)
    {
        int d = Dimension;
        if (Metric == DistanceMetric.Cosine)
        {
            for (int r = 0; r < source.Length / d; r++)
            {
                VectorChecks.Normalize(source.Slice(r * d, d), rows.AsSpan(r * d, d), "vectors");
            }
        }
        else
        {
            source.CopyTo(rows);
        }
    }

    // Writes each row's list entry: the vector itself, or the code of its residual from its list's centroid.
    private void Encode(float[] rows, ReadOnlySpan<int> labelSpan, int n, byte[] codes)
    {
        int d = Dimension;
        int size = _codeBytes;
        if (_options.Encoding == VectorEncoding.Float32)
        {
            MemoryMarshal.AsBytes(rows.AsSpan(0, n * d)).CopyTo(codes);
            return;
        }

        int[] labels = labelSpan.ToArray();
        const int Block = 256;
        int blocks = (n + Block - 1) / Block;
        var parallel = new ParallelOptions { MaxDegreeOfParallelism = _options.EffectiveParallelism };
        int tableLength = _product?.TableLength ?? 0;
        int rotatedLength = _product is { IsRotated: true } || _fourBit is { IsRotated: true } ? d : 0;
        Parallel.For(0, blocks, parallel, () => new float[d + rotatedLength + tableLength], (b, _, scratch) =>
        {
            Span<float> residual = scratch.AsSpan(0, d);
            Span<float> rotated = scratch.AsSpan(d, rotatedLength);
            Span<float> table = scratch.AsSpan(d + rotatedLength);
            int end = Math.Min(n, (b + 1) * Block);
            for (int r = b * Block; r < end; r++)
            {
                ReadOnlySpan<float> row = rows.AsSpan(r * d, d);
                ReadOnlySpan<float> centroid = _centroids.AsSpan(labels[r] * d, d);
                for (int j = 0; j < d; j++)
                {
                    residual[j] = row[j] - centroid[j];
                }

                Span<byte> code = codes.AsSpan(r * size, size);
                if (_fourBit is not null)
                {
                    if (rotatedLength > 0)
                    {
                        _fourBit.Rotate(residual, rotated);
                    }

                    _fourBit.EncodeUnchecked(rotatedLength > 0 ? rotated : residual, code);
                }
                else if (rotatedLength > 0)
                {
                    _product!.Rotate(residual, rotated);
                    _product.EncodeUnchecked(rotated, code, table);
                }
                else if (_product is not null)
                {
                    _product.EncodeUnchecked(residual, code, table);
                }
                else
                {
                    _scalar!.EncodeUnchecked(residual, code);
                }
            }

            return scratch;
        }, static _ => { });
    }

    /// <inheritdoc/>
    private protected override bool SizesStorageFromSample => !IsReadOnly;

    // Each list's share of the sample, scaled to the load, plus two standard deviations of that estimate (so few lists
    // outgrow it), reserved once: a streamed build then appends without regrowing its lists block after block, which
    // leaves each list's old arrays behind as large-object garbage.
    private protected override unsafe void ReserveFromSample(ReadOnlySpan<float> sample, int added, CancellationToken cancellationToken)
    {
        int d = Dimension;
        int n = sample.Length / d;
        if (!IsTrained || n == 0)
        {
            return;
        }

        var rows = new float[n * d];
        var labels = new int[n];
        var distances = new float[n];
        Prepare(sample[..(n * d)], rows);
        fixed (float* pointer = rows)
        {
            NearestCentroid.Assign(_kernelPath, pointer, n, _centroids, _options.ListCount, d, labels, distances, _options.EffectiveParallelism, cancellationToken);
        }

        var share = new int[_options.ListCount];
        foreach (int label in labels)
        {
            share[label]++;
        }

        double scale = added / (double)n;
        _lock.EnterWriteLock();
        try
        {
            if (IsDisposed)
            {
                return;
            }

            for (int list = 0; list < share.Length; list++)
            {
                double expected = (share[list] + (2 * Math.Sqrt(Math.Max(1, share[list])))) * scale;
                int capacity = (int)Math.Min(Array.MaxLength / Math.Max(1, _codeBytes), _listCounts[list] + Math.Ceiling(expected));
                if (_listSlots[list].Length < capacity)
                {
                    Array.Resize(ref _listSlots[list], capacity);
                    Array.Resize(ref _listCodes[list], checked((int)ListCodeBytes(capacity)));
                }
            }
        }
        finally
        {
            _lock.ExitWriteLock();
        }
    }

    /// <summary>Lists that had to be regrown by adds since the index was created (for tests of bulk-load sizing).</summary>
    internal int ListRegrowths { get; private set; }

    /// <summary>Called by an add once it has copied the lists it grows and before it takes the write lock (for tests).</summary>
    internal Action? AfterListsCopied { get; set; }

    // Grows every list that the batch adds to, once: exactly to size when it was empty (a bulk load leaves no slack),
    // else by half again or to size, whichever is larger. Runs under the write lock, so its own counts are pooled: an
    // allocation here could start a collection while every search waits for the lock. Arrays in `grown` were made
    // before the lock with the list's entries copied in; when `copiesCurrent` (no write since) they are swapped in as
    // they are, else the entries are copied again.
    private void GrowLists(ReadOnlySpan<int> labels, List<ListGrowth>? grown = null, bool copiesCurrent = false)
    {
        // Visits the batch's own lists, not every list: a single add then runs no long loop under the lock (a loop
        // that runs long enough in a method's first compiled form has the runtime recompile it on the spot).
        using var rental = ScratchRental<int>.Rent(_listCounts.Length);
        Span<int> added = rental.Span;
        foreach (int label in labels)
        {
            added[label] = 0;
        }

        foreach (int label in labels)
        {
            added[label]++;
        }

        foreach (int list in labels)
        {
            int adding = added[list];
            if (adding == 0)
            {
                continue;
            }

            added[list] = 0;
            int required = _listCounts[list] + adding;
            int current = _listSlots[list].Length;
            if (current < required)
            {
                ListRegrowths += current == 0 ? 0 : 1;
                ListGrowth ready = ReadyGrowth(grown, list);
                if (ready.Slots is not null && ready.Slots.Length >= required)
                {
                    int length = _listCounts[list];
                    if (!copiesCurrent || ready.Copied != length)
                    {
                        _listSlots[list].AsSpan(0, length).CopyTo(ready.Slots);
                        _listCodes[list].AsSpan(0, checked((int)ListCodeBytes(length))).CopyTo(ready.Codes);
                    }

                    _listSlots[list] = ready.Slots;
                    _listCodes[list] = ready.Codes;
                    continue;
                }

                int capacity = GrownListCapacity(current, required);
                Array.Resize(ref _listSlots[list], capacity);
                Array.Resize(ref _listCodes[list], checked((int)ListCodeBytes(capacity)));
            }
        }
    }

    // A list's larger arrays made before the write lock, holding the first `Copied` entries as they were then.
    private readonly record struct ListGrowth(int List, int[] Slots, byte[] Codes, int Copied);

    // The arrays GrownListsFor made for `list`, if any (a plain loop: a predicate capturing `list` would allocate).
    private static ListGrowth ReadyGrowth(List<ListGrowth>? grown, int list)
    {
        if (grown is not null)
        {
            foreach (ListGrowth growth in grown)
            {
                if (growth.List == list)
                {
                    return growth;
                }
            }
        }

        return default;
    }

    // The capacity a list of `current` entries grows to when it must hold `required`.
    private static int GrownListCapacity(int current, int required)
        => current == 0 ? required : Math.Max(required, current + Math.Max(8, current / 2));

    // For a small batch, the larger arrays of the lists it would overflow, made before the write lock with the lists'
    // entries copied in: an allocation of a large list's codes can wait for another thread's large allocation, and a
    // large list's copy takes milliseconds; under the lock every search would wait with them. Read without the lock
    // (another writer's step may change a list meanwhile, so lengths are bounded by the arrays read); GrowLists uses
    // the copies only if no write step ended since.
    private List<ListGrowth>? GrownListsFor(ReadOnlySpan<int> labels)
    {
        if (labels.Length > 64)
        {
            return null;
        }

        List<ListGrowth>? grown = null;
        for (int i = 0; i < labels.Length; i++)
        {
            int list = labels[i];
            int[] oldSlots = Volatile.Read(ref _listSlots[list]);
            byte[] oldCodes = Volatile.Read(ref _listCodes[list]);
            int length = Volatile.Read(ref _listCounts[list]);
            int required = length + labels.Length;
            if (oldSlots.Length < required && ReadyGrowth(grown, list).Slots is null)
            {
                int capacity = GrownListCapacity(oldSlots.Length, required);
                var slots = new int[capacity];
                var codes = new byte[checked((int)ListCodeBytes(capacity))];
                length = Math.Min(length, oldSlots.Length);
                int codeBytes = (int)Math.Min(ListCodeBytes(length), oldCodes.Length);
                oldSlots.AsSpan(0, length).CopyTo(slots);
                oldCodes.AsSpan(0, codeBytes).CopyTo(codes);

                // A large array can come from pages the system has not handed over yet (known to be zero, so not
                // written at allocation): writing the rest here takes their first-touch faults beside searches, where
                // the appends under the lock would take them otherwise.
                slots.AsSpan(length).Clear();
                codes.AsSpan(codeBytes).Clear();
                (grown ??= []).Add(new ListGrowth(list, slots, codes, codeBytes == ListCodeBytes(length) ? length : -1));
            }
        }

        return grown;
    }

    // Appends encoded rows to their lists (already grown) and to the slots.
    private void Append(ReadOnlySpan<long> ids, float[] rows, ReadOnlySpan<int> labels, byte[] codes, int n)
    {
        int d = Dimension;
        int size = _codeBytes;
        for (int r = 0; r < n; r++)
        {
            int list = labels[r];
            int position = _listCounts[list]++;
            int slot = _count + r;
            if (_fourBit is not null)
            {
                FastScanKernel.Put(_listCodes[list], size, position, codes.AsSpan(r * size, size));
            }
            else
            {
                codes.AsSpan(r * size, size).CopyTo(_listCodes[list].AsSpan(position * size, size));
            }
            _listSlots[list][position] = slot;
            _ids[slot] = ids[r];
            _listOf[slot] = list;
            _positionOf[slot] = position;
            if (_full is not null)
            {
                rows.AsSpan(r * d, d).CopyTo(_full.RowSpan(slot));
            }

            _slotOf.Add(ids[r], slot);
        }

        Volatile.Write(ref _count, _count + n);
    }

    /// <inheritdoc/>
    private protected override bool HasRoomFor(int added) => IsReadOnly || ((long)Volatile.Read(ref _count) + added <= _ids.Length && !IdMapMustGrow(added));

    /// <inheritdoc/>
    private protected override bool GrowRows(int added, IdMap? slotOf)
    {
        int count = _count;
        long required = (long)count + added;
        if (required <= _ids.Length || required > Array.MaxLength)
        {
            return false;
        }

        // The growth rule of EnsureSlotCapacity, so the arrays stay the size growing in place would give.
        int capacity = (int)Math.Min(Array.MaxLength, Math.Max(required, _ids.Length + ((long)_ids.Length / 2)));
        var ids = new long[capacity];
        var listOf = new int[capacity];
        var positionOf = new int[capacity];
        _ids.AsSpan(0, count).CopyTo(ids);
        _listOf.AsSpan(0, count).CopyTo(listOf);
        _positionOf.AsSpan(0, count).CopyTo(positionOf);
        VectorBuffer? full = _full is null ? null : new VectorBuffer(Dimension, capacity);
        try
        {
            _full?.CopyRowsTo(full!, count);
            full?.ClearRows(count, capacity - count);
            using (_lock.EnterWrite())
            {
                _ids = ids;
                _listOf = listOf;
                _positionOf = positionOf;
                _full?.Adopt(full!);
                if (slotOf is not null)
                {
                    _slotOf = slotOf;
                }
            }
        }
        finally
        {
            // The old block after the swap; the unused copy after a failure.
            full?.Dispose();
        }

        return true;
    }

    private void EnsureSlotCapacity(int required)
    {
        if (_ids.Length >= required)
        {
            return;
        }

        int capacity = (int)Math.Min(Array.MaxLength, Math.Max(required, _ids.Length + ((long)_ids.Length / 2)));
        Array.Resize(ref _ids, capacity);
        Array.Resize(ref _listOf, capacity);
        Array.Resize(ref _positionOf, capacity);
        if (_full is not null && _full.Capacity < capacity)
        {
            _full.Resize(capacity);
        }
    }

    // Residuals of (a sample of) the training rows from their nearest centroids, for the residual quantizer.
    private float[] Residuals(ReadOnlySpan<float> sample, KMeansResult coarse, int seed, CancellationToken cancellationToken)
    {
        int d = Dimension;
        int n = sample.Length / d;
        const int Cap = 65_536;
        float[] rows;
        if (n > Cap)
        {
            var random = new Random(seed ^ 0x5EED);
            rows = new float[Cap * d];
            for (int i = 0; i < Cap; i++)
            {
                // Rows drawn with replacement: enough for ranges and codebooks, and no n-sized index array.
                sample.Slice(random.Next(n) * d, d).CopyTo(rows.AsSpan(i * d, d));
            }

            n = Cap;
        }
        else
        {
            rows = sample.ToArray();
        }

        var labels = new int[n];
        coarse.Assign(rows, labels, cancellationToken);
        for (int r = 0; r < n; r++)
        {
            Span<float> row = rows.AsSpan(r * d, d);
            ReadOnlySpan<float> centroid = coarse.Centroid(labels[r]);
            for (int j = 0; j < d; j++)
            {
                row[j] -= centroid[j];
            }
        }

        return rows;
    }

    // The fast scan's per-list table terms (see _listTerms), else empty.
    private static float[] ListTerms(float[] centroids, float[] rotatedCentroids, FourBitQuantizer? fourBit)
    {
        if (fourBit is null)
        {
            return [];
        }

        int d = fourBit.Dimension;
        int length = fourBit.TableLength;
        float[] from = rotatedCentroids.Length != 0 ? rotatedCentroids : centroids;
        var terms = new float[checked(centroids.Length / d * length)];
        for (int c = 0; c < centroids.Length / d; c++)
        {
            fourBit.FillListTerms(from.AsSpan(c * d, d), terms.AsSpan(c * length, length));
        }

        return terms;
    }

    // R·c for every centroid under a rotated product quantizer (either layout), else empty.
    private static float[] RotatedCentroids(float[] centroids, ProductQuantizer? product, FourBitQuantizer? fourBit)
    {
        if (product is not { IsRotated: true } && fourBit is not { IsRotated: true })
        {
            return [];
        }

        int d = product?.Dimension ?? fourBit!.Dimension;
        var rotated = new float[centroids.Length];
        for (int c = 0; c < centroids.Length / d; c++)
        {
            if (product is not null)
            {
                product.Rotate(centroids.AsSpan(c * d, d), rotated.AsSpan(c * d, d));
            }
            else
            {
                fourBit!.Rotate(centroids.AsSpan(c * d, d), rotated.AsSpan(c * d, d));
            }
        }

        return rotated;
    }


    private sealed class KMeansForward(IProgress<IndexTrainingProgress> target) : IProgress<KMeansProgress>
    {
        public void Report(KMeansProgress value)
            => target.Report(new IndexTrainingProgress(value.Stage == KMeansStage.Seeding ? IndexTrainingStage.SeedingCentroids : IndexTrainingStage.RefiningCentroids, value.Completed, value.Total));
    }

    private sealed class SubspaceForward(IProgress<IndexTrainingProgress> target, int total) : IProgress<int>
    {
        public void Report(int value) => target.Report(new IndexTrainingProgress(IndexTrainingStage.TrainingQuantizer, value, total));
    }
}
