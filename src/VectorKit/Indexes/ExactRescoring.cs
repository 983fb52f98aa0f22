using System.Diagnostics.CodeAnalysis;
using System.Runtime.CompilerServices;
using System.Runtime.InteropServices;
using VectorKit.Distance;
using VectorKit.Distance.Kernels;
using VectorKit.Internal;

namespace VectorKit.Indexes;

/// <summary>Where the re-scoring stage finds an item's full float32 vector.</summary>
internal interface IFullRows
{
    /// <summary>The first component of the full vector of candidate <paramref name="index"/>, whose id is <paramref name="id"/>; valid until the next call.</summary>
    ref float Row(int index, long id);

    /// <summary>Hints that the full vector of candidate <paramref name="index"/> is read soon (where the rows are in memory).</summary>
    void Prefetch(int index, long id);
}

/// <summary>Full vectors kept in memory by the index, found through its id → slot map.</summary>
internal readonly struct SlotRows(VectorBuffer full, IdMap slotOf) : IFullRows
{
    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public ref float Row(int index, long id) => ref full.Row(slotOf[id]);

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public void Prefetch(int index, long id) => CachePrefetch.Lines(ref Unsafe.As<float, byte>(ref full.Row(slotOf[id])), full.Dimension * sizeof(float));
}

/// <summary>
/// Full vectors kept in memory, at slots the caller already knows (a graph walk ends with its results' slots), so
/// re-scoring skips the id map: <paramref name="slots"/>[i] is the slot of candidate i.
/// </summary>
internal readonly struct ListedRows(VectorBuffer full, int[] slots) : IFullRows
{
    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public ref float Row(int index, long id) => ref full.Row(slots[index]);

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public void Prefetch(int index, long id) => CachePrefetch.Lines(ref Unsafe.As<float, byte>(ref full.Row(slots[index])), full.Dimension * sizeof(float));
}

/// <summary>
/// Full vectors read from an attached <see cref="IFullVectorSource"/> (a file read on demand) into a per-thread row,
/// normalised there under cosine so the row matches what an in-memory index would have stored (the same
/// <see cref="VectorChecks.Normalize"/>, so the re-scored distances are bit-identical to <see cref="SlotRows"/>').
/// </summary>
internal readonly struct SourceRows(IFullVectorSource source, int dimension, bool normalise) : IFullRows
{
    // One row per thread: Rescore uses a row before asking for the next, and a search runs on one thread.
    [ThreadStatic]
    private static float[]? t_row;

    public ref float Row(int index, long id) => ref Row(id);

    private ref float Row(long id)
    {
        float[] row = t_row is { } held && held.Length >= dimension ? held : (t_row = new float[dimension]);
        Span<float> span = row.AsSpan(0, dimension);
        if (!source.TryGetVector(id, span))
        {
            ThrowMissing(id);
        }

        if (normalise)
        {
            VectorChecks.Normalize(span, span, "full vector");
        }

        return ref row[0];
    }

    /// <summary>Nothing to hint: the source copies each vector when it is asked for.</summary>
    public void Prefetch(int index, long id)
    {
    }

    /// <summary>Copies <paramref name="id"/>'s full vector, as re-scoring sees it, into <paramref name="destination"/> (for TryGetVector).</summary>
    public void CopyTo(long id, Span<float> destination) => MemoryMarshal.CreateReadOnlySpan(ref Row(id), dimension).CopyTo(destination);

    /// <summary>The checks of <see cref="IExternalFullVectors.AttachFullVectors"/>, shared by the index kinds.</summary>
    public static void CheckAttach(IFullVectorSource source, int dimension, bool external)
    {
        ArgumentNullException.ThrowIfNull(source);
        if (source.Dimension != dimension)
        {
            ThrowHelper.ThrowArgument(nameof(source), $"the source's vectors have {source.Dimension} components; the index dimension is {dimension}.");
        }

        if (!external)
        {
            throw new InvalidOperationException("This index does not read full vectors from a source: create it with FullVectorLocation.ExternalSource and a positive re-scoring depth under compressed storage.");
        }
    }

    /// <summary>Thrown by a search that needs to re-score while no source is attached.</summary>
    [DoesNotReturn]
    public static void ThrowNoSource()
        => throw new InvalidOperationException("Re-scoring reads full vectors from an external source, but none is attached (a loaded index has none): call AttachFullVectors, or search with RescoreDepth = 0 for approximate distances.");

    [DoesNotReturn]
    private static void ThrowMissing(long id)
        => throw new InvalidOperationException($"The attached full-vector source has no vector for id {id}; it must hold the vector of every id added to the index.");
}

/// <summary>
/// The exact re-scoring stage shared by the compressed indexes: replaces each candidate's approximate distance by the
/// metric's exact distance on the full vector, with the same kernel as the exact index (so re-scored distances equal
/// the exact index's, bit for bit). The caller sorts afterwards.
/// </summary>
internal static class ExactRescoring
{
    /// <param name="metric">The index metric (under cosine, the query and the rows are unit vectors).</param>
    /// <param name="path">The kernel width chosen for the dimension.</param>
    /// <param name="query">The query's first component.</param>
    /// <param name="dimension">Components per vector.</param>
    /// <param name="candidates">Candidates by approximate distance; rewritten in place.</param>
    /// <param name="rows">The full vectors.</param>
    public static void Rescore<TRows>(DistanceMetric metric, KernelPath path, ref float query, int dimension, Span<SearchHit> candidates, TRows rows)
        where TRows : struct, IFullRows
    {
        var action = new RescoreAction<TRows>(path, ref query, dimension, candidates, rows);
        MetricDispatch.Run<RescoreAction<TRows>, bool>(metric, ref action);
    }

    private ref struct RescoreAction<TRows>(KernelPath path, ref float query, int dimension, Span<SearchHit> candidates, TRows rows) : IMetricAction<bool>
        where TRows : struct, IFullRows
    {
        private readonly ref float _query = ref query;
        private readonly Span<SearchHit> _candidates = candidates;

        public readonly bool Run<TStep, TFinish>()
            where TStep : struct, IAccumulateStep
            where TFinish : struct, IDistanceFinish
        {
            // The candidates' rows lie scattered over the whole block: ask for all of them first, so their cache misses
            // overlap instead of being paid one after another.
            for (int i = 0; i < _candidates.Length; i++)
            {
                rows.Prefetch(i, _candidates[i].Id);
            }

            for (int i = 0; i < _candidates.Length; i++)
            {
                long id = _candidates[i].Id;
                float sum = ManyKernel.One<TStep>(path, ref _query, ref rows.Row(i, id), dimension);
                _candidates[i] = new SearchHit(id, TFinish.Apply(sum));
            }

            return true;
        }
    }
}
