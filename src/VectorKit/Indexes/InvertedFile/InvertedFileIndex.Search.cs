using System.Numerics;
using System.Numerics.Tensors;
using System.Runtime.CompilerServices;
using System.Runtime.InteropServices;
using VectorKit.Distance;
using VectorKit.Distance.Kernels;
using VectorKit.Internal;
using VectorKit.Quantization;

namespace VectorKit.Indexes.InvertedFile;

/// <summary>The search: nearest centroids, a scan of their lists by the storage's kernel, optional exact re-scoring.</summary>
public sealed partial class InvertedFileIndex
{
    // Entries scored per kernel call; their distances live in the scratch block.
    private const int ScanBlock = 256;


    [ThreadStatic]
    private static SearchScratch? t_scratch;

    /// <inheritdoc/>
    private protected override int SearchLocked(ReadOnlySpan<float> q, Span<SearchHit> destination, SearchOptions options)
    {
        SearchScratch scratch = RentScratch();
        try
        {
            return SearchLocked(q, destination, options, scratch);
        }
        finally
        {
            ReturnScratch(scratch);
        }
    }

    /// <inheritdoc/>
    private protected override void SearchBatchBlocks(ReadOnlySpan<float> queries, BatchSearchResults results, SearchOptions options, IProgress<int>? progress, CancellationToken cancellationToken)
        => BatchSearch.RunQueries(this, queries, Dimension, results, QueryBlock, options, progress, cancellationToken, static () => new SearchScratch(), (q, slots, scratch) => SearchLocked(q, slots, options, scratch));

    // Caller holds the read lock; q is validated (unit length under cosine).
    private int SearchLocked(ReadOnlySpan<float> q, Span<SearchHit> destination, SearchOptions options, SearchScratch scratch)
    {
        if (_count == 0)
        {
            return 0;
        }

        int k = destination.Length;
        int lists = _options.ListCount;
        int probes = Math.Min(SearchWidthFor(options, _options.SearchWidth), lists);
        int depth = RescoreDepthFor(options);
        int candidates = Math.Min(Math.Max(k, depth), _count);

        // The lists of the nearest centroids, nearest first so the candidate bound tightens early.
        Span<float> centroidDistances = scratch.CentroidDistances(lists);
        ref float query = ref MemoryMarshal.GetReference(q);
        ManyKernel.Compute<SquaredDifferenceStep>(_kernelPath, ref query, ref MemoryMarshal.GetArrayDataReference(_centroids), Dimension, lists, ref MemoryMarshal.GetReference(centroidDistances));
        Span<SearchHit> probeHeap = scratch.Probes(probes);
        int probeCount = 0;
        for (int l = 0; l < lists; l++)
        {
            TopK.Offer(probeHeap, ref probeCount, centroidDistances[l], l);
        }

        TopK.SortBestFirst(probeHeap, probeCount);
        Span<SearchHit> heap = scratch.Candidates(candidates);
        var scan = new ScanAction(this, q, probeHeap[..probeCount], heap, options.Filter, scratch);
        int found = MetricDispatch.Run<ScanAction, int>(Metric, ref scan);

        if (depth > 0)
        {
            RescoreLocked(_kernelPath, ref query, heap[..found], _full);
        }

        TopK.SortBestFirst(heap, found);
        int keep = Math.Min(k, found);
        heap[..keep].CopyTo(destination);
        return keep;
    }

    private int ScanProbed<TStep, TFinish>(ReadOnlySpan<float> q, ReadOnlySpan<SearchHit> probes, Span<SearchHit> heap, Func<long, bool>? filter, SearchScratch scratch)
        where TStep : struct, IAccumulateStep
        where TFinish : struct, IDistanceFinish
    {
        int d = Dimension;
        int size = _codeBytes;
        bool squared = typeof(TStep) == typeof(SquaredDifferenceStep);
        if (_fourBit is not null)
        {
            return ScanFastScan<TFinish>(q, probes, heap, filter, scratch, squared);
        }

        ref float query = ref MemoryMarshal.GetReference(q);
        Span<float> block = scratch.Block(ScanBlock);
        ref float distances = ref MemoryMarshal.GetReference(block);
        int count = 0;
        float bound = float.PositiveInfinity;

        // Per-query preparation for the compressed kinds: the dot-product table or padded query do not depend on the list.
        // A rotated product quantizer works on R·q, rotated once here (see _rotatedCentroids).
        Span<float> table = default;
        Span<float> prepared = default;
        ReadOnlySpan<float> codeQuery = q;
        if (_product is not null)
        {
            table = scratch.Table(_product.TableLength);
            if (_product.IsRotated)
            {
                Span<float> rotated = scratch.Rotated(d);
                _product.Rotate(q, rotated);
                codeQuery = rotated;
            }

            if (!squared)
            {
                _product.FillTable(codeQuery, table, squared: false);
            }
        }
        else if (_scalar is not null)
        {
            prepared = scratch.Prepared(_scalar.CodeBytes);
            _scalar.Pad(q, prepared);
        }

        Span<float> residual = _options.Encoding == VectorEncoding.Float32 ? default : scratch.Residual(Math.Max(d, _scalar?.CodeBytes ?? 0));
        foreach (SearchHit probe in probes)
        {
            int list = (int)probe.Id;
            int length = _listCounts[list];
            if (length == 0)
            {
                continue;
            }

            ref byte codes = ref MemoryMarshal.GetReference(ListCodes(list));
            int[] slots = _listSlots[list];
            ReadOnlySpan<float> centroid = _centroids.AsSpan(list * d, d);

            // Compressed codes hold x − c (rotated: R·(x − c)): under squared L2 the query moves by −c (R·q by −R·c);
            // under a dot product q·c is added (R preserves dot products, so the table of R·q serves the rest).
            float offset = 0;
            if (_options.Encoding != VectorEncoding.Float32)
            {
                if (squared)
                {
                    ReadOnlySpan<float> from = centroid;
                    if (_rotatedCentroids.Length != 0)
                    {
                        from = _rotatedCentroids.AsSpan(list * d, d);
                    }

                    for (int j = 0; j < d; j++)
                    {
                        residual[j] = codeQuery[j] - from[j];
                    }

                    if (_product is not null)
                    {
                        _product.FillTable(residual[..d], table, squared: true);
                    }
                    else
                    {
                        residual[d.._scalar!.CodeBytes].Clear();
                    }
                }
                else
                {
                    offset = PairKernel.Sum<DotStep>(_kernelPath, q, centroid);
                }
            }

            for (int start = 0; start < length; start += ScanBlock)
            {
                int n = Math.Min(ScanBlock, length - start);
                ref byte first = ref Unsafe.Add(ref codes, (nint)start * size);
                switch (_options.Encoding)
                {
                    case VectorEncoding.Float32:
                        ManyKernel.Compute<TStep>(_kernelPath, ref query, ref Unsafe.As<byte, float>(ref first), d, n, ref distances);
                        break;
                    case VectorEncoding.ProductCodes:
                        _product!.Scan(ref MemoryMarshal.GetReference(table), ref first, n, ref distances);
                        break;
                    default:
                        _scalar!.Compute<TStep>(_kernelPath, ref MemoryMarshal.GetReference(squared ? residual : prepared), ref first, n, ref distances);
                        break;
                }

                for (int j = 0; j < n; j++)
                {
                    float distance = TFinish.Apply(offset + Unsafe.Add(ref distances, j));
                    if (distance <= bound)
                    {
                        long id = EntryId(list, slots, start + j);
                        if (filter is null || filter(id))
                        {
                            TopK.Offer(heap, ref count, distance, id);
                            bound = TopK.Bound(heap, count);
                        }
                    }
                }
            }
        }

        return count;
    }

    // The four-bit fast scan: per probed list a float table (for dot products one per query), its 8-bit levels and
    // their register image, then FastScanKernel over the list's blocks. The tables hold distance contributions: negated
    // dot products, or under squared L2 the query's terms −2 (R·q)_m · c_{m,j} plus the list's stored terms (the rest,
    // ‖q − centroid‖², is the probe's own distance), so distance = start + bias + step × level sum under every metric.
    private int ScanFastScan<TFinish>(ReadOnlySpan<float> q, ReadOnlySpan<SearchHit> probes, Span<SearchHit> heap, Func<long, bool>? filter, SearchScratch scratch, bool squared)
        where TFinish : struct, IDistanceFinish
    {
        int d = Dimension;
        int size = _codeBytes;
        FourBitQuantizer quantizer = _fourBit!;
        int subspaces = quantizer.Subspaces;
        Span<float> table = scratch.Table(quantizer.TableLength);
        Span<byte> levels = scratch.Levels(quantizer.TableLength);
        Span<byte> image = scratch.Image(size * FastScanKernel.ImageBytesPerCodeByte);
        Span<ushort> sums = scratch.Sums(ScanBlock);
        ref byte imageStart = ref MemoryMarshal.GetReference(image);
        ref ushort sumStart = ref MemoryMarshal.GetReference(sums);
        ReadOnlySpan<float> codeQuery = q;
        if (quantizer.IsRotated)
        {
            Span<float> rotated = scratch.Rotated(d);
            quantizer.Rotate(q, rotated);
            codeQuery = rotated;
        }

        float bias = 0, step = 1;
        Span<float> listTable = default;
        if (squared)
        {
            quantizer.FillDotTerms(codeQuery, table, -2f);
            listTable = scratch.Prepared(quantizer.TableLength);
        }
        else
        {
            quantizer.FillTable(codeQuery, table, squared: false);
            (bias, step) = FastScanKernel.QuantizeTable(table, subspaces, levels);
            FastScanKernel.PrepareImage(_kernelPath, levels, size, image);
        }

        int count = 0;
        float bound = float.PositiveInfinity;
        foreach (SearchHit probe in probes)
        {
            int list = (int)probe.Id;
            int length = _listCounts[list];
            if (length == 0)
            {
                continue;
            }

            float start;
            if (squared)
            {
                // The probe's distance is ‖q − centroid‖², the same as ‖R·q − R·centroid‖² (R is orthogonal).
                TensorPrimitives.Add(table, _listTerms.AsSpan(list * listTable.Length, listTable.Length), listTable);
                (bias, step) = FastScanKernel.QuantizeTable(listTable, subspaces, levels);
                FastScanKernel.PrepareImage(_kernelPath, levels, size, image);
                start = probe.Distance + bias;
            }
            else
            {
                start = TFinish.Apply(PairKernel.Sum<DotStep>(_kernelPath, q, _centroids.AsSpan(list * d, d))) + bias;
            }

            ref byte codes = ref MemoryMarshal.GetReference(ListCodes(list));
            int[] slots = _listSlots[list];

            // The sum limit the bound allows in this list (the start differs per list), recomputed when the bound moves.
            float limitBound = float.NaN;
            int limit = 0;
            for (int first = 0; first < length; first += ScanBlock)
            {
                int n = Math.Min(ScanBlock, length - first);
                int blocks = (n + FastScanKernel.BlockSize - 1) / FastScanKernel.BlockSize;

                // `first` is a multiple of the block size, so its blocks start at first × code bytes.
                FastScanKernel.Scan(_kernelPath, ref imageStart, ref Unsafe.Add(ref codes, (nint)first * size), size, blocks, ref sumStart);

                // Block by block, only the entries whose level sum can beat the bound (the bound as it stands when the
                // block starts; each visited entry is still compared with the current one).
                for (int b = 0; b < n; b += FastScanKernel.BlockSize)
                {
                    if (bound != limitBound)
                    {
                        limit = FastScanKernel.SumLimit(bound, start, step);
                        limitBound = bound;
                    }

                    if (limit < 0)
                    {
                        break;
                    }

                    uint mask = FastScanKernel.AtMost(_kernelPath, ref Unsafe.Add(ref sumStart, b), (ushort)limit);
                    if (n - b < FastScanKernel.BlockSize)
                    {
                        mask &= (1u << (n - b)) - 1;
                    }

                    while (mask != 0)
                    {
                        int j = b + BitOperations.TrailingZeroCount(mask);
                        mask &= mask - 1;
                        float distance = start + (step * Unsafe.Add(ref sumStart, j));
                        if (distance <= bound)
                        {
                            long id = EntryId(list, slots, first + j);
                            if (filter is null || filter(id))
                            {
                                TopK.Offer(heap, ref count, distance, id);
                                bound = TopK.Bound(heap, count);
                            }
                        }
                    }
                }
            }
        }

        return count;
    }

    private static SearchScratch RentScratch()
    {
        SearchScratch? scratch = t_scratch;
        if (scratch is null || scratch.InUse)
        {
            // A filter that searches another inverted-file index on this thread gets scratch of its own.
            scratch = new SearchScratch();
            t_scratch ??= scratch;
        }

        scratch.InUse = true;
        return scratch;
    }

    private static void ReturnScratch(SearchScratch scratch) => scratch.InUse = false;

    /// <summary>The scan of the probed lists with the metric resolved.</summary>
    private readonly ref struct ScanAction(InvertedFileIndex index, ReadOnlySpan<float> q, ReadOnlySpan<SearchHit> probes, Span<SearchHit> heap, Func<long, bool>? filter, SearchScratch scratch) : IMetricAction<int>
    {
        private readonly ReadOnlySpan<float> _q = q;
        private readonly ReadOnlySpan<SearchHit> _probes = probes;
        private readonly Span<SearchHit> _heap = heap;

        public int Run<TStep, TFinish>()
            where TStep : struct, IAccumulateStep
            where TFinish : struct, IDistanceFinish
            => index.ScanProbed<TStep, TFinish>(_q, _probes, _heap, filter, scratch);
    }

    /// <summary>One thread's search buffers, grown on demand and reused, so a search allocates nothing in steady state.</summary>
    private sealed class SearchScratch
    {
        private float[] _unit = [];
        private float[] _centroidDistances = [];
        private SearchHit[] _probes = [];
        private SearchHit[] _candidates = [];
        private float[] _block = [];
        private float[] _table = [];
        private float[] _prepared = [];
        private float[] _residual = [];
        private float[] _rotated = [];
        private byte[] _levels = [];
        private byte[] _image = [];
        private ushort[] _sums = [];

        public bool InUse { get; set; }

        public Span<float> Unit(int length) => Grow(ref _unit, length);

        public Span<float> CentroidDistances(int length) => Grow(ref _centroidDistances, length);

        public Span<SearchHit> Probes(int length) => Grow(ref _probes, length);

        public Span<SearchHit> Candidates(int length) => Grow(ref _candidates, length);

        public Span<float> Block(int length) => Grow(ref _block, length);

        public Span<float> Table(int length) => Grow(ref _table, length);

        public Span<float> Prepared(int length) => Grow(ref _prepared, length);

        public Span<float> Residual(int length) => Grow(ref _residual, length);

        public Span<float> Rotated(int length) => Grow(ref _rotated, length);

        public Span<byte> Levels(int length) => Grow(ref _levels, length);

        public Span<byte> Image(int length) => Grow(ref _image, length);

        public Span<ushort> Sums(int length) => Grow(ref _sums, length);

        private static Span<T> Grow<T>(ref T[] array, int length)
        {
            if (array.Length < length)
            {
                array = new T[length];
            }

            return array.AsSpan(0, length);
        }
    }
}
