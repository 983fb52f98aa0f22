using System.Runtime.CompilerServices;
using VectorKit.Distance;
using VectorKit.Distance.Kernels;
using VectorKit.Internal;
using VectorKit.Quantization;

namespace VectorKit.Indexes.Graph;

/// <summary>
/// A metric's distance from a prepared query to a stored node of the graph, smaller is better, for one way of storing
/// the rows: float32 rows (bit-identical to the exact index) or 8-bit codes (the float query against the decoded code).
/// </summary>
/// <remarks>
/// Implementations are generic over the metric's step, its finish and the SIMD lane, resolved once per operation by
/// <see cref="GraphDispatch"/>: the kernel body then inlines into the graph walk instead of being chosen again for
/// every pair, and the float path runs exactly the code it ran before codes existed.
/// <para>A <i>prepared query</i> is a search query (for codes padded with zeros to the code length), or a stored node turned into a query by <see cref="NodeAsQuery"/>. Node-to-node distances are thus one
/// side decoded once and the other read as a code; both kernels are symmetric term by term, so which side is decoded
/// does not change the result.</para>
/// </remarks>
internal interface IGraphDistance
{
    /// <summary>The distance from a prepared query to the row of <paramref name="slot"/>.</summary>
    static abstract float ToNode(GraphIndex index, ref float query, int slot);

    /// <summary>
    /// The row of <paramref name="slot"/> as a prepared query: the stored float row itself, or the code decoded into
    /// buffer <paramref name="place"/> of the scratch (valid until that place is written again).
    /// </summary>
    static abstract ref float NodeAsQuery(GraphIndex index, int slot, GraphScratch scratch, int place);

    /// <summary>What <see cref="NodeAsQuery"/> returned earlier for the same slot and place, without decoding again.</summary>
    static abstract ref float Prepared(GraphIndex index, int slot, GraphScratch scratch, int place);

    /// <summary>Asks the cache for the row of <paramref name="slot"/>.</summary>
    static abstract void Prefetch(GraphIndex index, int slot);

    /// <summary>Bytes of one row as <see cref="ToNode"/> reads it.</summary>
    static abstract int RowBytes(GraphIndex index);
}

/// <summary>Float32 rows: the exact index's kernel, so distances equal its own bit for bit.</summary>
internal readonly struct FloatGraphDistance<TStep, TFinish, TLane> : IGraphDistance
    where TStep : struct, IAccumulateStep
    where TFinish : struct, IDistanceFinish
    where TLane : struct, IVectorLane<TLane>
{
    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static float ToNode(GraphIndex index, ref float query, int slot)
        => TFinish.Apply(ManyKernel.One<TStep, TLane>(ref query, ref index.FloatRows.Row(slot), index.Dimension));

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static ref float NodeAsQuery(GraphIndex index, int slot, GraphScratch scratch, int place) => ref index.FloatRows.Row(slot);

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static ref float Prepared(GraphIndex index, int slot, GraphScratch scratch, int place) => ref index.FloatRows.Row(slot);

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static void Prefetch(GraphIndex index, int slot)
        => CachePrefetch.Lines(ref Unsafe.As<float, byte>(ref index.FloatRows.Row(slot)), index.Dimension * sizeof(float));

    public static int RowBytes(GraphIndex index) => index.Dimension * sizeof(float);
}

/// <summary>8-bit scalar codes: the float query against the decoded code, on the SIMD byte-code kernel.</summary>
internal readonly struct CodeGraphDistance<TStep, TFinish, TLane> : IGraphDistance
    where TStep : struct, IAccumulateStep
    where TFinish : struct, IDistanceFinish
    where TLane : struct, IVectorLane<TLane>
{
    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static float ToNode(GraphIndex index, ref float query, int slot)
    {
        ScalarQuantizer quantizer = index.Quantizer;
        return TFinish.Apply(ByteCodeKernel.One<TStep, TLane>(ref query, ref quantizer.ScaleReference, ref quantizer.OffsetReference, ref index.CodeRows.Row(slot), quantizer.CodeBytes));
    }

    public static ref float NodeAsQuery(GraphIndex index, int slot, GraphScratch scratch, int place)
    {
        ScalarQuantizer quantizer = index.Quantizer;
        Span<float> into = scratch.DecodePlace(place, quantizer.CodeBytes, index.DecodePlaces);
        quantizer.DecodePadded(index.CodeRows.RowSpan(slot), into);
        return ref into[0];
    }

    public static ref float Prepared(GraphIndex index, int slot, GraphScratch scratch, int place)
        => ref scratch.DecodePlace(place, index.Quantizer.CodeBytes, index.DecodePlaces)[0];

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static void Prefetch(GraphIndex index, int slot)
        => CachePrefetch.Lines(ref index.CodeRows.Row(slot), index.Quantizer.CodeBytes);

    public static int RowBytes(GraphIndex index) => index.Quantizer.CodeBytes;
}

/// <summary>An operation of the graph index that runs with one concrete distance (storage, metric and SIMD width).</summary>
internal interface IGraphAction<TResult>
{
    TResult Run<TDistance>()
        where TDistance : struct, IGraphDistance;
}

/// <summary>Resolves the storage, a metric and the kernel width for a dimension into one concrete <see cref="IGraphDistance"/>.</summary>
internal static class GraphDispatch
{
    public static TResult Run<TAction, TResult>(DistanceMetric metric, KernelPath path, bool codes, ref TAction action)
        where TAction : struct, IGraphAction<TResult>, allows ref struct
    {
        var byMetric = new ByMetric<TAction, TResult>(action, path, codes);
        return MetricDispatch.Run<ByMetric<TAction, TResult>, TResult>(metric, ref byMetric);
    }

    /// <summary>The metric resolved by <see cref="MetricDispatch"/>; the kernel width and the storage next.</summary>
    private ref struct ByMetric<TAction, TResult>(TAction action, KernelPath path, bool codes) : IMetricAction<TResult>
        where TAction : struct, IGraphAction<TResult>, allows ref struct
    {
        private TAction _action = action;

        public TResult Run<TStep, TFinish>()
            where TStep : struct, IAccumulateStep
            where TFinish : struct, IDistanceFinish
            => ByPath<TAction, TResult, TStep, TFinish>(path, codes, ref _action);
    }

    private static TResult ByPath<TAction, TResult, TStep, TFinish>(KernelPath path, bool codes, ref TAction action)
        where TAction : struct, IGraphAction<TResult>, allows ref struct
        where TStep : struct, IAccumulateStep
        where TFinish : struct, IDistanceFinish
    {
        return path switch
        {
            KernelPath.Vector512 => ByStorage<TAction, TResult, TStep, TFinish, Lane512>(codes, ref action),
            KernelPath.Vector256 => ByStorage<TAction, TResult, TStep, TFinish, Lane256>(codes, ref action),
            KernelPath.Vector128 => ByStorage<TAction, TResult, TStep, TFinish, Lane128>(codes, ref action),
            _ => ByStorage<TAction, TResult, TStep, TFinish, LaneScalar>(codes, ref action),
        };
    }

    private static TResult ByStorage<TAction, TResult, TStep, TFinish, TLane>(bool codes, ref TAction action)
        where TAction : struct, IGraphAction<TResult>, allows ref struct
        where TStep : struct, IAccumulateStep
        where TFinish : struct, IDistanceFinish
        where TLane : struct, IVectorLane<TLane>
        => codes
            ? action.Run<CodeGraphDistance<TStep, TFinish, TLane>>()
            : action.Run<FloatGraphDistance<TStep, TFinish, TLane>>();
}
