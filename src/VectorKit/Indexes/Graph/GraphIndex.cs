using System.Runtime.CompilerServices;
using System.Runtime.InteropServices;
using VectorKit.Distance;
using VectorKit.Distance.Kernels;
using VectorKit.Quantization;
using VectorKit.Internal;

namespace VectorKit.Indexes.Graph;

/// <summary>
/// Approximate k-nearest-neighbour search over a hierarchical navigable small-world graph (HNSW). On large indexes a
/// search reads a small fraction of the items, so it costs far less than a full scan, at the price of occasionally
/// missing a true neighbour.
/// </summary>
/// <remarks>
/// <para><b>Structure.</b> A layered proximity graph as published by Malkov &amp; Yashunin (IEEE TPAMI 2020,
/// arXiv:1603.09320): each item gets a random level (<c>⌊−ln(U) / ln(M)⌋</c>, M = <see cref="GraphIndexOptions.LinksPerNode"/>)
/// and bidirectional links chosen by the paper's neighbour-selection heuristic; a search descends greedily through the
/// upper layers and runs a beam search on the bottom one.</para>
/// <para><b>Results.</b> Best first, ties by id. Under float32 storage each distance equals the exact index's, bit for
/// bit; under <see cref="VectorEncoding.Scalar8Bit"/> distances are to the decoded codes, unless re-scoring
/// (<see cref="VectorIndexOptions.RescoreDepth"/>) replaces them with exact ones. A search may return fewer than k items
/// when the walk reaches fewer (tiny or heavily filtered indexes).</para>
/// <para><b>Filters.</b> <see cref="SearchOptions.Filter"/> is applied during the walk; when a sample suggests that too
/// few items pass for a walk to pay off (<see cref="GraphIndexOptions.FilteredExactScanFraction"/>), the passing items
/// are scanned exactly instead.</para>
/// <para><b>Writes.</b> <see cref="VectorIndex.AddRange"/> links new items in parallel while searches proceed; a
/// cancelled batch is taken out again. A removed item is never returned from the moment it is hidden (a short exclusive
/// step), and the lists that linked to it are repaired before the removal returns, at a cost that does not grow with
/// the index: they are chosen again beside searches and written a few dozen at a time, so searches wait for a few list
/// copies at most, while other writes wait for the whole repair. Its space is released by <see cref="Compact"/>. Every live item is kept reachable from the entry point: a
/// node cut off by pruning is re-linked at once, and a full reachability pass runs after enough changes. That pass runs
/// at the end of the write that made it due, after the write itself is visible: its traversals run beside searches and
/// its changes are made a few lists at a time, so searches wait for a few list repairs at most; other writes wait for
/// the whole pass.</para>
/// <para><b>Thread safety.</b> All members are thread-safe. Searches run concurrently with each other, with the
/// linking phase of adds, with the rebuild of <see cref="Compact"/> (they see the old graph until the swap), with
/// saving and with the traversals of the global pass; they may or may not see an item being linked. Writes run beside
/// the rebuild of <see cref="Compact"/> too, which replays them before its swap. Replacement,
/// <see cref="VectorIndex.Dispose"/>, the swap of a compaction, the hiding and repair steps of a removal, the steps of
/// the global pass and the short store and repair steps of an add are exclusive.</para>
/// <para>See docs/choosing-an-index.md, docs/live-updates.md and docs/filters.md in the repository for when to use
/// this index, how updates behave, and how filters are evaluated.</para>
/// </remarks>
public sealed partial class GraphIndex : VectorIndex
{
    // Scratch places of rows decoded from codes (see IGraphDistance.NodeAsQuery): the node being linked or attached,
    // the owner of a list being pruned or re-linked, and from KeptPlace on the nodes neighbour selection has kept.
    private const int BasePlace = 0;
    private const int OriginPlace = 1;
    private const int KeptPlace = 2;

    private const int MaxLevel = 30;
    private const int LockStripes = 1024;
    private const int FilterSampleSize = 256;


    // The cost model's constant for choosing between a filtered walk and an exact scan (fitted; see
    // GraphIndexOptions.FilteredExactScanFraction).
    private const double WalkCostConstant = 0.2;

    // Lists a repair (a removal's, or the global pass's) writes per hold of the write lock; they are chosen before it
    // is taken, so a hold costs only the copies.
    private const int RelinkStep = 64;

    // Row bytes a walk keeps on their way from memory ahead of the row it measures (BeamSearch).
    private const int PrefetchBytes = 1024;

    // Bounds of the walk that finds the lists naming a removed node (see FindInLinks).
    private const int InLinkSearchHops = 3;
    private const int InLinkSearchNodes = 4096;

    // A compaction replays the writes that landed during its rebuild in rounds beside new writes until at most this
    // many ids are pending, then the rest while writes wait; the rounds are capped for writers that outpace the replay.
    private const int CatchUpTail = 64;
    private const int CatchUpRounds = 16;

    private readonly object[] _stripes = new object[LockStripes];

    // One compaction at a time; training waits for it too (the rebuilt graph encodes with the ranges it started with).
    private readonly SemaphoreSlim _compaction = new(1, 1);
    private readonly object _entryLock = new();
    private readonly GraphIndexOptions _options;
    // Float rows: the storage under float32, the full vectors kept in memory for re-scoring under codes, else null;
    // re-scoring from an external source reads _source (set by the constructor or AttachFullVectors, under the write lock).
    private VectorBuffer? _vectors;
    private readonly bool _readsExternally;
    private CodeBuffer? _codes;
    private ScalarQuantizer? _scalar;
    private GraphLinks _links;
    private readonly double _levelScale;
    private readonly KernelPath _path;
    private Random _levelRandom;
    // Per slot: the id, and 1 when removed (native columns, so that a mapped file's sections can back them in place).
    private IdColumn _ids;
    private Column<byte> _removed;
    private int _used;
    private int[] _levelCounts = new int[MaxLevel + 1];
    private readonly List<int> _orphanNotes = [];
    private long _changesSinceFullPass;
    // Set under the write lock when the global pass is due; the write that set it runs the pass on its way out.
    private bool _fullPassDue;

    // Orphans were noted by a write whose attaches run from AfterWrite (AttachDueOrphans).
    private bool _attachDue;
    private long _orphansAttached;
    private long _orphansAttachedLocally;
    private long _fullPasses;
    private long _incompleteRemovals;
    private readonly List<int> _waypoints = [];

    // The lists a global pass finds naming waypoints (RetireWaypoints), kept with their room between passes.
    private readonly List<long> _waypointLists = [];

    // Slots retired by removals whose repair has not run yet (RunPendingRepairs); locked on itself.
    private readonly List<int> _pendingRepairs = [];

    // The entry point and the top level, packed (level << 32 | slot) so a reader gets a consistent pair; slot -1 when empty.
    private long _entry = -1L & 0xFFFFFFFFL;

    /// <summary>Creates an empty graph index.</summary>
    /// <param name="dimension">Components per vector, at least 1.</param>
    /// <param name="metric">The distance metric.</param>
    /// <param name="options">Graph options; <see langword="null"/> for <see cref="GraphIndexOptions.Default"/>.</param>
    /// <exception cref="ArgumentOutOfRangeException"><paramref name="dimension"/> is not positive, or <paramref name="metric"/> is not defined.</exception>
    /// <remarks>Under <see cref="VectorEncoding.Scalar8Bit"/> the index must be trained (<see cref="Train"/>) before the first add or search.</remarks>
    public GraphIndex(int dimension, DistanceMetric metric, GraphIndexOptions? options = null)
        : base(dimension, metric)
    {
        _options = options ?? GraphIndexOptions.Default;
        _path = KernelDispatch.For(dimension, KernelDispatch.Widest);
        _levelScale = 1.0 / Math.Log(_options.LinksPerNode);
        _levelRandom = new Random(_options.Seed);
        if (_options.Encoding == VectorEncoding.Scalar8Bit)
        {
            _codes = new CodeBuffer(ScalarQuantizer.PaddedLength(dimension), _options.InitialCapacity);
            _readsExternally = _options.RescoreDepth > 0 && _options.FullVectors == FullVectorLocation.ExternalSource;
        }

        if (_codes is null || (_options.RescoreDepth > 0 && !_readsExternally))
        {
            _vectors = new VectorBuffer(dimension, _options.InitialCapacity);
        }

        _links = new GraphLinks(_options.LinksPerNode, _options.EffectiveBottomLayerLinks);
        _links.EnsureCapacity(_options.InitialCapacity);
        _ids = new IdColumn(_options.InitialCapacity);
        _removed = new Column<byte>(_options.InitialCapacity);
        for (int i = 0; i < _stripes.Length; i++)
        {
            _stripes[i] = new object();
        }
    }

    /// <summary>Creates an empty graph index under 8-bit storage that re-scores from <paramref name="fullVectors"/>.</summary>
    /// <param name="dimension">Components per vector, at least 1.</param>
    /// <param name="metric">The distance metric.</param>
    /// <param name="options">Options with <see cref="VectorEncoding.Scalar8Bit"/> storage, a positive <see cref="VectorIndexOptions.RescoreDepth"/> and <see cref="VectorIndexOptions.FullVectors"/> = <see cref="FullVectorLocation.ExternalSource"/>.</param>
    /// <param name="fullVectors">The full vector of every id that will be added (not owned by the index).</param>
    /// <exception cref="ArgumentOutOfRangeException"><paramref name="dimension"/> is not positive, or <paramref name="metric"/> is not defined.</exception>
    /// <exception cref="ArgumentException">The source's dimension differs from <paramref name="dimension"/>.</exception>
    /// <exception cref="ArgumentNullException"><paramref name="options"/> or <paramref name="fullVectors"/> is <see langword="null"/>.</exception>
    /// <exception cref="InvalidOperationException">The options do not re-score from an external source.</exception>
    /// <remarks>The index must still be trained (<see cref="Train"/>) before the first add or search.</remarks>
    public GraphIndex(int dimension, DistanceMetric metric, GraphIndexOptions options, IFullVectorSource fullVectors)
        : this(dimension, metric, options ?? throw new ArgumentNullException(nameof(options)))
    {
        try
        {
            SourceRows.CheckAttach(fullVectors, dimension, _readsExternally);
        }
        catch
        {
            Dispose(); // the code block is native memory
            throw;
        }

        _source = fullVectors;
    }

    /// <summary>The options the index was built with.</summary>
    public GraphIndexOptions Options => _options;

    /// <inheritdoc/>
    private protected override VectorIndexOptions SharedOptions => _options;

    /// <inheritdoc/>
    private protected override (int Max, int Default, bool CoversDepth) WidthKnob => (TunedSearchDefaults.MaxSearchWidth, _options.SearchWidth, true);

    /// <inheritdoc/>
    private protected override string NotTrainedMessage => "The graph index stores 8-bit codes and is not trained: call Train with a sample of at least one vector (a few thousand representative ones are plenty) before adding or searching.";

    /// <summary>
    /// Whether the index can take vectors: always under <see cref="VectorEncoding.Float32"/>; under
    /// <see cref="VectorEncoding.Scalar8Bit"/> once <see cref="Train"/> has run.
    /// </summary>
    public override bool IsTrained => _codes is null || Volatile.Read(ref _scalar) is not null;

    /// <summary>
    /// Bytes a graph walk reads per stored vector: <c>4 × dimension</c> for float32, the dimension rounded up to a
    /// multiple of 16 for 8-bit codes. Full vectors kept for re-scoring are not counted (a search reads them only for
    /// the re-scored candidates); <see cref="VectorIndex.MemoryBytes"/> counts them.
    /// </summary>
    public override int CodeBytesPerVector => _codes?.Dimension ?? Dimension * sizeof(float);

    /// <summary>
    /// Under 8-bit storage, learns the range of every component from <paramref name="sample"/> (under cosine the rows
    /// are normalised first, as stored vectors are); values outside a trained range are later clamped to its ends, so
    /// the sample should cover the data to come. Under float32 storage there is nothing to learn: the sample is
    /// validated and the call returns, changing nothing.
    /// </summary>
    /// <param name="sample">Training rows, row after row: at least one row of finite components (a few thousand representative rows are plenty). They are not added to the index.</param>
    /// <param name="progress">Optional; receives <see cref="IndexTrainingStage.TrainingQuantizer"/> once the ranges are learnt.</param>
    /// <param name="cancellationToken">Checked before the ranges are stored; a cancelled training leaves the index as it was.</param>
    /// <remarks>Training again before any add replaces the ranges. Exclusive: waits for running searches.</remarks>
    /// <exception cref="ArgumentException">The sample is empty, not a multiple of the dimension, has a non-finite component, or a zero row under cosine.</exception>
    /// <exception cref="InvalidOperationException">Under 8-bit storage, the index already stores vectors (removed ones count until <see cref="Compact"/>): their codes depend on the current ranges.</exception>
    /// <exception cref="OperationCanceledException">The token was cancelled.</exception>
    /// <exception cref="ObjectDisposedException">The index was disposed.</exception>
    public override void Train(ReadOnlySpan<float> sample, IProgress<IndexTrainingProgress>? progress = null, CancellationToken cancellationToken = default)
    {
        ScalarQuantizer? scalar = ScalarCodeTraining.Learn(sample, Dimension, Metric, _codes is not null, cancellationToken);
        using var compaction = _compaction.EnterScope(cancellationToken);
        using var gate = _writerGate.EnterRead();
        _lock.EnterWriteLock();
        try
        {
            ThrowIfDisposed();
            ThrowIfReadOnly();
            if (_codes is not null && _used > 0)
            {
                throw new InvalidOperationException($"The graph index stores {_used} vectors ({_count} live), whose 8-bit codes depend on the current training; train before adding, or build a new index.");
            }

            cancellationToken.ThrowIfCancellationRequested();
            if (scalar is not null)
            {
                Volatile.Write(ref _scalar, scalar);
            }
        }
        finally
        {
            _lock.ExitWriteLock();
        }

        progress?.Report(new IndexTrainingProgress(IndexTrainingStage.TrainingQuantizer, 1, 1));
    }

    /// <summary>The float rows (float32 storage, or the full vectors kept beside codes); only for distances resolved to them.</summary>
    internal VectorBuffer FloatRows => _vectors!;

    /// <summary>The 8-bit codes; only for distances resolved to them.</summary>
    internal CodeBuffer CodeRows => _codes!;

    /// <summary>The trained quantizer of the codes; only for distances resolved to them.</summary>
    internal ScalarQuantizer Quantizer => _scalar!;

    /// <summary>Decoded-row places an operation may use (see <see cref="GraphScratch.DecodePlace"/>).</summary>
    internal int DecodePlaces => KeptPlace + _links.MaxLimit + 1;

    // Vectors (or 8-bit codes, plus the full vectors when kept in memory, plus the trained ranges) at their reserved
    // capacity, ids, the link arrays, per-slot level and removal flags, and the id lookup. Removed items keep their space
    // until Compact; an attached external source is not counted (the index does not own it).
    private protected override long MemoryBytesLocked()
        => (_vectors?.Bytes ?? 0) + (_codes?.Bytes ?? 0) + (_scalar is null ? 0 : 2L * _scalar.CodeBytes * sizeof(float))
            + _links.Bytes + _ids.Bytes + _removed.Bytes + _slotOf.Bytes;

    // The float row, or under 8-bit storage without full vectors the decoded code.
    private protected override void CopyStoredLocked(int slot, Span<float> destination)
    {
        if (_vectors is not null)
        {
            _vectors.RowSpan(slot).CopyTo(destination);
        }
        else
        {
            _scalar!.Decode(_codes!.RowSpan(slot), destination);
        }
    }

    // New ids are linked beside searches; a replace batch is exclusive (see the class remarks, Writes).
    private protected override int WriteBatch(ReadOnlySpan<long> ids, ReadOnlySpan<float> vectors, bool replace, IProgress<int>? progress, CancellationToken cancellationToken)
        => replace ? ReplaceBatch(ids, vectors, progress, cancellationToken) : AddBatch(ids, vectors, progress, cancellationToken);

    // New ids only: stored in a short exclusive step, linked beside searches, taken out again when cancelled.
    private int AddBatch(ReadOnlySpan<long> ids, ReadOnlySpan<float> vectors, IProgress<int>? progress, CancellationToken cancellationToken)
    {
        int n = ids.Length;
        int first;
        using (_lock.EnterWrite())
        {
            ThrowIfDisposed();
            ThrowIfReadOnly();
            ThrowIfNotTrained();
            _slotOf.CheckAbsent(ids, nameof(ids));
            first = StoreBatch(ids, vectors, replacing: false);
            _changeLog?.RecordWrite(ids, vectors);
        }

        AfterBatchStored?.Invoke();
        try
        {
            // Linking takes as long as searches do, many over: as a batch query's, its read lock makes a writer wait
            // for it before the writer keeps new searches out, not after.
            _lock.EnterBatchReadLock();
            using var read = new IndexLock.BatchReadScope(_lock);
            ThrowIfDisposed();
            DuringLinking?.Invoke();
            LinkAll(first, n, progress, cancellationToken);
        }
        catch (OperationCanceledException)
        {
            RollBack(first, n);
            throw;
        }

        FinishAdd(first, n);
        return 0;
    }

    // Exclusive: the new vectors are stored and linked as new nodes, then each replaced id moves to its new node in one
    // step and its old node is retired with repair; a cancelled batch takes the new nodes out again.
    private int ReplaceBatch(ReadOnlySpan<long> ids, ReadOnlySpan<float> vectors, IProgress<int>? progress, CancellationToken cancellationToken)
    {
        int n = ids.Length;
        using var write = _lock.EnterWrite();
        ThrowIfDisposed();
        ThrowIfReadOnly();
        ThrowIfNotTrained();
        int first = StoreBatch(ids, vectors, replacing: true);
        try
        {
            LinkAll(first, n, progress, cancellationToken);
        }
        catch (OperationCanceledException)
        {
            RollBackLocked(first, n, log: null);
            throw;
        }

        // Borrowed: a compaction replays its log's writes one at a time through here, under the write lock.
        using var retired = ScratchRental<int>.Rent(n);
        int replaced = 0;
        for (int r = 0; r < n; r++)
        {
            int slot = first + r;
            if (_slotOf.TryGetValue(ids[r], out int old) && old != slot)
            {
                retired.Span[replaced++] = old;
                _slotOf[ids[r]] = slot;
            }
        }

        ReadOnlySpan<int> oldSlots = retired.Span[..replaced];
        RetireLocked(oldSlots);
        FinishLocked(oldSlots, first, n, forceFullPass: false);
        _changeLog?.RecordWrite(ids, vectors);
        return replaced;
    }

    // After a cancelled batch: takes every slot of it that is still live out of the index again, with repair.
    private void RollBack(int first, int n)
    {
        using var write = _lock.EnterWrite();
        if (!IsDisposed)
        {
            RollBackLocked(first, n, _changeLog);
        }
    }

    // Caller holds the write lock. A slot of the batch owns its id's map entry unless that id is being replaced. The
    // ids taken out of the map are recorded as removals in `log`, when an add batch recorded them as written.
    private void RollBackLocked(int first, int n, ChangeLog? log)
    {
        var slots = new List<int>(n);
        var unmapped = log is null ? null : new List<long>(n);
        for (int slot = first; slot < first + n; slot++)
        {
            if (_removed[slot] == 0)
            {
                if (_slotOf.TryGetValue(_ids[slot], out int mapped) && mapped == slot)
                {
                    _slotOf.Remove(_ids[slot]);
                    unmapped?.Add(_ids[slot]);
                }

                slots.Add(slot);
            }
        }

        if (unmapped is { Count: > 0 })
        {
            log!.RecordRemove(unmapped.ToArray());
        }

        int[] retired = [.. slots];
        RetireLocked(retired);
        FinishLocked(retired, first, n, forceFullPass: false);
    }

    /// <inheritdoc/>
    private protected override void ReleaseStorage()
    {
        _vectors?.Dispose();
        _codes?.Dispose();
        _ids.Dispose();
        _removed.Dispose();
        _mapping?.Dispose();
        _used = 0;
        Volatile.Write(ref _entry, -1L & 0xFFFFFFFFL);
    }

    /// <inheritdoc/>
    private protected override bool HasRoomFor(int added) => IsReadOnly || ((long)Volatile.Read(ref _used) + added <= _links.Capacity && !IdMapMustGrow(added));

    /// <inheritdoc/>
    private protected override bool GrowRows(int added, IdMap? slotOf)
    {
        // The gate held alone keeps out every writer, linking adds included (they write outside the write lock).
        int used = _used;
        int capacity = _vectors?.Capacity ?? _codes!.Capacity;
        long required = (long)used + added;
        int cap = Array.MaxLength / (_links.BottomLimit + 1);
        if (required <= capacity || required > cap)
        {
            return false;
        }

        // The growth rule of RowBuffer.EnsureCapacity and GraphLinks.EnsureCapacity.
        int grown = (int)Math.Min(cap, Math.Max(required, capacity + ((long)capacity / 2)));
        VectorBuffer? vectors = _vectors is null ? null : new VectorBuffer(Dimension, grown);
        CodeBuffer? codes = _codes is null ? null : new CodeBuffer(_codes.Dimension, grown);
        var ids = new IdColumn(grown);
        var removed = new Column<byte>(grown);
        try
        {
            _vectors?.CopyRowsTo(vectors!, used);
            _codes?.CopyRowsTo(codes!, used);

            // The rows to come are touched now, not by the first add to reach each page, under the write lock.
            vectors?.ClearRows(used, grown - used);
            codes?.ClearRows(used, grown - used);
            GraphLinks links = _links.GrownCopy(grown);
            _ids.CopyRowsTo(ids, used);
            _removed.CopyRowsTo(removed, used);
            using (_lock.EnterWrite())
            {
                if (vectors is not null)
                {
                    _vectors!.Adopt(vectors);
                }

                if (codes is not null)
                {
                    _codes!.Adopt(codes);
                }

                _links = links;
                _ids.Adopt(ids);
                _removed.Adopt(removed);
                if (slotOf is not null)
                {
                    _slotOf = slotOf;
                }
            }
        }
        finally
        {
            // The old blocks after the swap; the unused copies after a failure.
            vectors?.Dispose();
            codes?.Dispose();
            ids.Dispose();
            removed.Dispose();
        }

        return true;
    }

    // Reserves slots for a validated batch, writes vectors (normalised under cosine; encoded under codes) and ids, and draws levels.
    // Caller holds the write lock. When the graph is empty the first new slot becomes the entry point at once, so
    // linking never races to create it. Returns the first slot.
    private int StoreBatch(ReadOnlySpan<long> ids, ReadOnlySpan<float> vectors, bool replacing)
    {
        int n = ids.Length;
        int first = _used;
        int required = checked(first + n);
        int capacity = EnsureRowCapacity(required);
        _links.EnsureCapacity(capacity);
        if (_ids.Capacity < capacity)
        {
            _ids.Resize(capacity);
            _removed.Resize(capacity);
        }

        _slotOf.EnsureCapacity(_slotOf.Count + n);
        float[]? unit = _vectors is null && Metric == DistanceMetric.Cosine ? new float[Dimension] : null;
        for (int r = 0; r < n; r++)
        {
            int slot = first + r;
            ReadOnlySpan<float> vector = vectors.Slice(r * Dimension, Dimension);
            if (_vectors is not null)
            {
                if (Metric == DistanceMetric.Cosine)
                {
                    VectorChecks.Normalize(vector, _vectors.RowSpan(slot), nameof(vectors));
                }
                else
                {
                    vector.CopyTo(_vectors.RowSpan(slot));
                }

                vector = _vectors.RowSpan(slot);
            }
            else if (unit is not null)
            {
                VectorChecks.Normalize(vector, unit, nameof(vectors));
                vector = unit;
            }

            _scalar?.EncodeUnchecked(vector, _codes!.RowSpan(slot));

            _ids[slot] = ids[r];
            _removed[slot] = 0;
            if (!replacing || !_slotOf.ContainsKey(ids[r]))
            {
                _slotOf.Add(ids[r], slot);
            }

            InitNode(slot);
        }

        _used = required;
        Volatile.Write(ref _count, _count + n);
        if (EntrySlot(Volatile.Read(ref _entry)) < 0)
        {
            Volatile.Write(ref _entry, Pack(first, _links.Level(first)));
        }

        return first;
    }

    // Grows the row storage (vectors and/or codes, in step) to hold `required` rows; returns the capacity.
    private int EnsureRowCapacity(int required)
    {
        _vectors?.EnsureCapacity(required);
        _codes?.EnsureCapacity(required);
        return _vectors?.Capacity ?? _codes!.Capacity;
    }

    // Draws the level of a new slot and gives it empty lists. Caller excludes every other user of the links.
    private void InitNode(int slot)
    {
        int level = DrawLevel();
        _links.InitNode(slot, level);
        _levelCounts[level]++;
    }

    private int DrawLevel()
    {
        // 1 − NextDouble() lies in (0, 1], so the logarithm is finite.
        double level = -Math.Log(1.0 - _levelRandom.NextDouble()) * _levelScale;
        return (int)Math.Min(MaxLevel, Math.Floor(level));
    }

    /// <inheritdoc/>
    private protected override int SearchLocked(ReadOnlySpan<float> q, Span<SearchHit> destination, SearchOptions options)
    {
        if (_count == 0)
        {
            return 0;
        }

        Func<long, bool>? filter = options.Filter;
        int depth = RescoreDepthFor(options);

        int width = Math.Max(Math.Max(destination.Length, depth), SearchWidthFor(options, _options.SearchWidth));

        // Codes are read in lanes of up to 16: the query gets zeros up to the code length, which meet zero scales.
        int length = _codes?.Dimension ?? 0;
        using var paddedRental = ScratchRental<float>.Rent(length > 1024 ? length : 0);
        Span<float> padded = length > 1024 ? paddedRental.Span : stackalloc float[length];
        _scalar?.Pad(q, padded);
        var action = new SearchAction
        {
            Index = this,
            Query = q,
            Prepared = _codes is null ? q : padded,
            Destination = destination,
            Width = width,
            Depth = depth,
            Filter = filter,
            Scan = filter is not null && PrefersExactScan(filter, width),
        };
        return Dispatch<SearchAction, int>(ref action);
    }

    // Runs an operation with the distance of this index's storage, metric and kernel width.
    private TResult Dispatch<TAction, TResult>(ref TAction action)
        where TAction : struct, IGraphAction<TResult>, allows ref struct
        => GraphDispatch.Run<TAction, TResult>(Metric, _path, _codes is not null, ref action);

    // Under full vectors kept beside codes (or read from the attached source): the first max(k, depth) of `hits` (sorted by code distance) get their exact
    // distances and are sorted again, so every distance returned is exact; the caller then takes the best k of them.
    // Returns how many remain candidates.
    // `slots` (when not null) holds the slot of each hit, so rows in memory are found without the id map.
    private int Rescore(ref float query, Span<SearchHit> hits, int[]? slots, int k, int depth)
    {
        if (depth <= 0)
        {
            return hits.Length;
        }

        Span<SearchHit> rescored = hits[..Math.Min(Math.Max(k, depth), hits.Length)];
        RescoreLocked(_path, ref query, rescored, _readsExternally ? null : _vectors, slots);

        rescored.Sort();
        return rescored.Length;
    }

    // Estimates the filter's pass rate on a fixed, evenly spaced sample of slots (deterministic: no random draw) and
    // compares it with the fixed fraction of the options or the cost model's crossover (see the option's remarks).
    private bool PrefersExactScan(Func<long, bool> filter, int width)
    {
        double threshold = FilteredScanFractionOverride
            ?? _options.FilteredExactScanFraction
            ?? Math.Sqrt(WalkCostConstant * width * _links.BottomLimit / Math.Max(1, _count));
        if (threshold <= 0)
        {
            return false;
        }

        int used = _used;
        int samples = Math.Min(FilterSampleSize, used);
        int seen = 0, passed = 0;
        for (int i = 0; i < samples; i++)
        {
            int slot = (int)((long)i * used / samples);
            if (_removed[slot] != 0)
            {
                continue;
            }

            seen++;
            if (filter(_ids[slot]))
            {
                passed++;
            }
        }

        return seen == 0 || passed < threshold * seen;
    }

    // The exact scan of the passing items (exact on the stored rows: under codes, code distances, then re-scored).
    // Not inlined: a distance loop keeps its own inlining budget for the kernel (see BeamSearch).
    [MethodImpl(MethodImplOptions.NoInlining)]
    private int ScanFiltered<TDistance>(ref float query, ref float prepared, Span<SearchHit> destination, int depth, Func<long, bool> filter)
        where TDistance : struct, IGraphDistance
    {
        int size = Math.Min(Math.Max(destination.Length, depth), _count);
        bool rents = size > destination.Length;
        using var rental = ScratchRental<SearchHit>.Rent(rents ? size : 0);
        Span<SearchHit> heap = rents ? rental.Span : destination[..size];
        int count = 0;
        int used = _used;
        for (int slot = 0; slot < used; slot++)
        {
            if (_removed[slot] == 0 && filter(_ids[slot]))
            {
                TopK.Offer(heap, ref count, TDistance.ToNode(this, ref prepared, slot), _ids[slot]);
            }
        }

        count = TopK.SortBestFirst(heap, count);
        count = Rescore(ref query, heap[..count], null, destination.Length, depth);
        int written = Math.Min(destination.Length, count);
        if (rents)
        {
            heap[..written].CopyTo(destination);
        }

        return written;
    }

    /// <summary>One search with its distance resolved: a filtered exact scan or a graph walk.</summary>
    private ref struct SearchAction : IGraphAction<int>
    {
        public GraphIndex Index;

        /// <summary>The query as given (unit length under cosine), for re-scoring.</summary>
        public ReadOnlySpan<float> Query;

        /// <summary>The query the stored rows are measured against: itself, or padded to the code length.</summary>
        public ReadOnlySpan<float> Prepared;
        public Span<SearchHit> Destination;
        public int Width;
        public int Depth;
        public Func<long, bool>? Filter;
        public bool Scan;

        public readonly int Run<TDistance>()
            where TDistance : struct, IGraphDistance
        {
            ref float query = ref MemoryMarshal.GetReference(Query);
            ref float prepared = ref MemoryMarshal.GetReference(Prepared);
            return Scan
                ? Index.ScanFiltered<TDistance>(ref query, ref prepared, Destination, Depth, Filter!)
                : Index.SearchGraph<TDistance>(ref query, ref prepared, Destination, Width, Depth, Filter);
        }
    }

    private static long Pack(int slot, int level) => ((long)level << 32) | (uint)slot;

    private static int EntrySlot(long packed) => (int)(packed & 0xFFFFFFFFL);

    private static int EntryLevel(long packed) => (int)(packed >> 32);

    private object StripeOf(int slot) => _stripes[slot & (LockStripes - 1)];

}
