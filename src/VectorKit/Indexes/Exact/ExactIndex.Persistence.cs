using VectorKit.Distance;
using VectorKit.Distance.Kernels;
using VectorKit.Quantization;
using VectorKit.Internal;

namespace VectorKit.Indexes.Exact;

/// <summary>
/// The exact index's primary state for persistence: dimension, metric, ids and rows (under 8-bit storage: the code
/// ranges, the codes and the full vectors when kept in memory). Everything else (squared norms, the id lookup, the padded
/// ranges) is derived again by <see cref="FromParts"/> or <see cref="FromCodeParts"/>, so saved files never depend on
/// internal bookkeeping.
/// </summary>
public sealed partial class ExactIndex
{
    private ExactIndex(int dimension, DistanceMetric metric, VectorBuffer vectors, IdColumn ids, int count, float[]? squaredNorms)
        : base(dimension, metric)
    {
        _options = ExactIndexOptions.Default;
        _kernelPath = KernelDispatch.Widest;
        _vectors = vectors;
        _ids = ids;
        _count = count;
        _squaredNorms = metric == DistanceMetric.Cosine ? [] : squaredNorms ?? new float[ids.Capacity];
    }

    /// <summary>Whether the index keeps a squared norm per row (every metric but cosine, whose rows are unit length).</summary>
    internal static bool KeepsSquaredNorms(DistanceMetric metric) => metric != DistanceMetric.Cosine;

    // Only the float32 batch kernel uses the norms.
    private static bool KeepsSquaredNorms(DistanceMetric metric, VectorEncoding storage) => storage == VectorEncoding.Float32 && KeepsSquaredNorms(metric);

    /// <summary>
    /// The squared norms of rows [<paramref name="first"/>, first + <paramref name="count"/>), exactly as an add
    /// computes them, so a loader can derive them block by block while the rows are in cache.
    /// </summary>
    internal static void ComputeSquaredNorms(VectorBuffer vectors, int first, int count, Span<float> destination)
    {
        for (int i = 0; i < count; i++)
        {
            Span<float> row = vectors.RowSpan(first + i);
            destination[first + i] = PairKernel.Sum<DotStep>(KernelDispatch.Widest, row, row);
        }
    }

    /// <summary>
    /// Runs <paramref name="export"/> on the live rows while holding the writer gate exclusively, so it sees one
    /// consistent state: the row count, the ids array (first <c>count</c> entries valid) and the vector storage (first
    /// <c>count</c> rows). Writes wait until it returns; searches proceed and never queue behind it (it does not hold
    /// the read lock, behind which a waiting writer would hold back new searches).
    /// </summary>
    internal T ExportParts<T>(Func<int, IdColumn, VectorBuffer, T> export)
    {
        using var gate = _writerGate.EnterWrite();
        ThrowIfDisposed();
        return export(_count, _ids, _vectors);
    }

    /// <summary>
    /// Builds an index around loaded primary state, taking ownership of <paramref name="vectors"/> (disposed on
    /// failure) and <paramref name="ids"/> (likewise), and derives the squared norms and the id lookup.
    /// </summary>
    /// <param name="dimension">Components per vector.</param>
    /// <param name="metric">The metric; under cosine the rows must already be unit length.</param>
    /// <param name="ids">At least <paramref name="count"/> ids, row order.</param>
    /// <param name="vectors">At least <paramref name="count"/> finite rows.</param>
    /// <param name="count">The number of rows.</param>
    /// <param name="squaredNorms">
    /// The rows' squared norms from <see cref="ComputeSquaredNorms"/> (at least <paramref name="count"/>), or
    /// <see langword="null"/> to compute them here; ignored under cosine.
    /// </param>
    /// <exception cref="InvalidDataException">An id repeats.</exception>
    internal static ExactIndex FromParts(int dimension, DistanceMetric metric, IdColumn ids, VectorBuffer vectors, int count, float[]? squaredNorms = null)
    {
        var index = new ExactIndex(dimension, metric, vectors, ids, count, squaredNorms);
        Task? norms = null;
        try
        {
            // The norms (a pass over the vectors) and the id lookup (hashing the ids) are independent: on two cores
            // they overlap.
            if (KeepsSquaredNorms(metric) && squaredNorms is null && count > 0)
            {
                norms = Task.Run(() => ComputeSquaredNorms(vectors, 0, count, index._squaredNorms));
            }

            index._slotOf.EnsureCapacity(count);
            for (int slot = 0; slot < count; slot++)
            {
                if (!index._slotOf.TryAdd(ids[slot], slot))
                {
                    throw new InvalidDataException($"id {ids[slot]} appears at rows {index._slotOf[ids[slot]]} and {slot}; ids must be unique");
                }
            }

            norms?.GetAwaiter().GetResult();
            norms = null;
            return index;
        }
        catch
        {
            // The norms task reads the vectors: it must finish before they are freed.
            if (norms is not null)
            {
                ((IAsyncResult)norms).AsyncWaitHandle.WaitOne();
            }

            index.Dispose();
            throw;
        }
    }

    // A loaded index under 8-bit storage; takes ownership of the buffers.
    private ExactIndex(int dimension, DistanceMetric metric, int rescoreDepth, FullVectorLocation location, ScalarQuantizer? scalar, CodeBuffer codes, VectorBuffer? full, IdColumn ids, int count)
        : base(dimension, metric)
    {
        _kernelPath = KernelDispatch.Widest;
        _options = new ExactIndexOptions { Encoding = VectorEncoding.Scalar8Bit, RescoreDepth = rescoreDepth, FullVectors = location };
        _readsExternally = _options.ReadsFullVectorsExternally;
        _keepsVectors = _options.KeepsFullVectorsInMemory;
        _scalar = scalar;
        _codes = codes;
        _vectors = full ?? new VectorBuffer(dimension, 0);
        _ids = ids;
        _count = count;
        _squaredNorms = [];
    }

    /// <summary>The primary state of an index under 8-bit storage, as <see cref="ExportCodeParts"/> hands it out.</summary>
    /// <param name="Count">Live rows.</param>
    /// <param name="Ids">At least <paramref name="Count"/> ids, row order.</param>
    /// <param name="Scalar">The trained quantizer, or <see langword="null"/> when untrained.</param>
    /// <param name="Codes">At least <paramref name="Count"/> codes of <see cref="ScalarQuantizer.PaddedLength"/> bytes.</param>
    /// <param name="FullVectors">The full vectors (unit length under cosine) when kept in memory, else <see langword="null"/>.</param>
    internal readonly record struct CodeParts(int Count, IdColumn Ids, ScalarQuantizer? Scalar, CodeBuffer Codes, VectorBuffer? FullVectors);

    /// <summary>
    /// Under 8-bit storage, runs <paramref name="export"/> on the live state while holding the writer gate exclusively
    /// (writes wait, searches proceed), so it sees one consistent state.
    /// </summary>
    internal T ExportCodeParts<T>(Func<CodeParts, T> export)
    {
        using var gate = _writerGate.EnterWrite();
        ThrowIfDisposed();
        return export(new CodeParts(_count, _ids, _scalar, _codes!, _keepsVectors ? _vectors : null));
    }

    // The mapped file whose read-only view backs the ids, rows and codes (null for an index in memory); the index
    // owns it and unmaps it on Dispose, after the buffers have let go of it.
    private IDisposable? _mapping;

    /// <summary>
    /// Whether the index reads a mapped file in place (opened with <c>IndexFile.OpenMapped</c>): searches and reads
    /// only; adds, replaces, removals, training and <see cref="Compact"/> throw <see cref="NotSupportedException"/>.
    /// </summary>
    public bool IsMapped => Volatile.Read(ref _mapping) is not null;

    /// <inheritdoc/>
    private protected override bool IsReadOnly => IsMapped;

    /// <summary>
    /// Builds a read-only index over borrowed buffers (a mapped file's view), taking ownership of
    /// <paramref name="mapping"/> (disposed on failure, or with the index). Float32 when <paramref name="codes"/> is
    /// null; otherwise 8-bit codes with the given ranges, and full vectors in <paramref name="vectors"/> when kept.
    /// </summary>
    /// <exception cref="InvalidDataException">A range is unusable, a code's padding is not zero (when checked), or an untrained index holds rows.</exception>
    internal static ExactIndex FromMapped(IDisposable mapping, int dimension, DistanceMetric metric, IdColumn ids, IdMap slotOf, VectorBuffer vectors, CodeBuffer? codes, float[]? ranges, int rescoreDepth, FullVectorLocation location, int count, bool checkPadding)
    {
        ExactIndex index;
        try
        {
            if (codes is null)
            {
                index = new ExactIndex(dimension, metric, vectors, ids, count, squaredNorms: []);
            }
            else
            {
                // Kept by what the options say, not by the rows borrowed: an empty file's full vectors have none.
                VectorBuffer? full = rescoreDepth > 0 && location == FullVectorLocation.InIndexMemory ? vectors : null;
                ScalarQuantizer? scalar = CheckCodeParts(dimension, rescoreDepth, location, ranges, codes, full, count, checkPadding);
                index = new ExactIndex(dimension, metric, rescoreDepth, location, scalar, codes, full, ids, count);
            }
        }
        catch
        {
            ids.Dispose();
            vectors.Dispose();
            codes?.Dispose();
            mapping.Dispose();
            throw;
        }

        index._slotOf = slotOf;
        index._mapping = mapping;
        return index;
    }

    private static ScalarQuantizer? CheckCodeParts(int dimension, int rescoreDepth, FullVectorLocation location, float[]? ranges, CodeBuffer codes, VectorBuffer? full, int count, bool checkPadding)
    {
        if ((full is not null) != (rescoreDepth > 0 && location == FullVectorLocation.InIndexMemory))
        {
            throw new InvalidDataException($"the re-score depth is {rescoreDepth} and the full vectors' location {location}, but full vectors are {(full is null ? "missing" : "present")}; they are kept exactly when the depth is positive and the location is in memory");
        }

        ScalarQuantizer? scalar = null;
        if (ranges is null)
        {
            if (count != 0)
            {
                throw new InvalidDataException($"an untrained index holds no vectors, but {count} are stored");
            }
        }
        else
        {
            if (ranges.Length != 2 * dimension)
            {
                throw new InvalidDataException($"{ranges.Length} scalar range values are stored; dimension {dimension} needs {2 * dimension}");
            }

            scalar = ScalarQuantizer.FromRanges(ranges.AsSpan(0, dimension), ranges.AsSpan(dimension, dimension), dimension);
        }

        // The kernel reads whole padded codes: padding must decode to zero, as the encoder leaves it.
        for (int slot = 0; checkPadding && slot < count; slot++)
        {
            if (codes.RowSpan(slot)[dimension..].IndexOfAnyExcept((byte)0) >= 0)
            {
                throw new InvalidDataException($"row {slot} has non-zero padding after its {dimension} code bytes");
            }
        }

        return scalar;
    }

    /// <summary>
    /// Builds an index under 8-bit storage around loaded primary state, taking ownership of <paramref name="codes"/>
    /// and <paramref name="full"/> (both disposed on failure). Checks what a search relies on: usable ranges, codes
    /// with the encoder's zero padding, unique ids, and no rows when untrained.
    /// </summary>
    /// <param name="dimension">Components per vector.</param>
    /// <param name="metric">The metric; under cosine the full vectors must already be unit length.</param>
    /// <param name="rescoreDepth">The default re-score depth; positive with an in-memory <paramref name="location"/> exactly when <paramref name="full"/> is given.</param>
    /// <param name="location">Where re-scoring reads full vectors (an external source is attached after the load).</param>
    /// <param name="ranges"><paramref name="dimension"/> minimums then <paramref name="dimension"/> steps, or <see langword="null"/> when untrained.</param>
    /// <param name="ids">At least <paramref name="count"/> ids, row order.</param>
    /// <param name="codes">At least <paramref name="count"/> codes.</param>
    /// <param name="full">At least <paramref name="count"/> finite rows when re-scoring from memory is on, else <see langword="null"/>.</param>
    /// <param name="count">The number of rows.</param>
    /// <param name="checkPadding">Whether to check every code's padding (a pass over the codes).</param>
    /// <exception cref="InvalidDataException">A range is unusable, a code's padding is not zero, an id repeats, or an untrained index holds rows.</exception>
    internal static ExactIndex FromCodeParts(int dimension, DistanceMetric metric, int rescoreDepth, FullVectorLocation location, float[]? ranges, IdColumn ids, CodeBuffer codes, VectorBuffer? full, int count, bool checkPadding = true)
    {
        ScalarQuantizer? scalar;
        try
        {
            scalar = CheckCodeParts(dimension, rescoreDepth, location, ranges, codes, full, count, checkPadding);
        }
        catch
        {
            codes.Dispose();
            full?.Dispose();
            ids.Dispose();
            throw;
        }

        var index = new ExactIndex(dimension, metric, rescoreDepth, location, scalar, codes, full, ids, count);
        try
        {
            index._slotOf.EnsureCapacity(count);
            for (int slot = 0; slot < count; slot++)
            {
                if (!index._slotOf.TryAdd(ids[slot], slot))
                {
                    throw new InvalidDataException($"id {ids[slot]} appears at rows {index._slotOf[ids[slot]]} and {slot}; ids must be unique");
                }
            }

            return index;
        }
        catch
        {
            index.Dispose();
            throw;
        }
    }
}
