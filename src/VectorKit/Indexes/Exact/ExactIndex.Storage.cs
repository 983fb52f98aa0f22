using VectorKit.Distance;
using VectorKit.Distance.Kernels;

namespace VectorKit.Indexes.Exact;

/// <summary>
/// The exact index's primary state for persistence: dimension, metric, ids and rows. Everything else (squared norms,
/// the id lookup) is derived again by <see cref="FromParts"/>, so saved files never depend on internal bookkeeping.
/// </summary>
public sealed partial class ExactIndex
{
    private ExactIndex(int dimension, DistanceMetric metric, VectorBuffer vectors, long[] ids, int count, float[]? squaredNorms)
    {
        Dimension = dimension;
        Metric = metric;
        _kernelPath = KernelDispatch.Widest;
        _vectors = vectors;
        _ids = ids;
        _count = count;
        _squaredNorms = metric == DistanceMetric.Cosine ? [] : squaredNorms ?? new float[ids.Length];
    }

    /// <summary>Whether the index keeps a squared norm per row (every metric but cosine, whose rows are unit length).</summary>
    internal static bool KeepsSquaredNorms(DistanceMetric metric) => metric != DistanceMetric.Cosine;

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
    /// Runs <paramref name="export"/> on the live rows while holding the read lock, so it sees one consistent state:
    /// the row count, the ids array (first <c>count</c> entries valid) and the vector storage (first <c>count</c> rows).
    /// Writes wait until it returns; searches proceed.
    /// </summary>
    internal T ExportParts<T>(Func<int, long[], VectorBuffer, T> export)
    {
        _lock.EnterReadLock();
        try
        {
            ThrowIfDisposed();
            return export(_count, _ids, _vectors);
        }
        finally
        {
            _lock.ExitReadLock();
        }
    }

    /// <summary>
    /// Builds an index around loaded primary state, taking ownership of <paramref name="vectors"/> (disposed on
    /// failure), and derives the squared norms and the id lookup.
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
    internal static ExactIndex FromParts(int dimension, DistanceMetric metric, long[] ids, VectorBuffer vectors, int count, float[]? squaredNorms = null)
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
}
