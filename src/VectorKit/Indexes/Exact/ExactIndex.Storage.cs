using VectorKit.Distance;
using VectorKit.Distance.Kernels;

namespace VectorKit.Indexes.Exact;

/// <summary>
/// The exact index's primary state for persistence: dimension, metric, ids and rows. Everything else (squared norms,
/// the id lookup) is derived again by <see cref="FromParts"/>, so saved files never depend on internal bookkeeping.
/// </summary>
public sealed partial class ExactIndex
{
    private ExactIndex(int dimension, DistanceMetric metric, VectorBuffer vectors, long[] ids, int count)
    {
        Dimension = dimension;
        Metric = metric;
        _kernelPath = KernelDispatch.Widest;
        _vectors = vectors;
        _ids = ids;
        _count = count;
        _squaredNorms = metric == DistanceMetric.Cosine ? [] : new float[ids.Length];
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
    /// <exception cref="InvalidDataException">An id repeats.</exception>
    internal static ExactIndex FromParts(int dimension, DistanceMetric metric, long[] ids, VectorBuffer vectors, int count)
    {
        var index = new ExactIndex(dimension, metric, vectors, ids, count);
        Task? norms = null;
        try
        {
            // The norms (a pass over the vectors) and the id lookup (hashing the ids) are independent: on two cores
            // they overlap.
            if (metric != DistanceMetric.Cosine && count > 0)
            {
                norms = Task.Run(() =>
                {
                    for (int slot = 0; slot < count; slot++)
                    {
                        Span<float> row = vectors.RowSpan(slot);
                        index._squaredNorms[slot] = PairKernel.Sum<DotStep>(index._kernelPath, row, row);
                    }
                });
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
