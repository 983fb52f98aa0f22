using System.Runtime.CompilerServices;
using VectorKit.Distance;
using VectorKit.Distance.Kernels;

namespace VectorKit.Indexes.Graph;

/// <summary>A metric's distance between two rows, smaller is better, bit-identical to what the exact index reports.</summary>
/// <remarks>
/// Implementations are generic over the SIMD lane, resolved once per operation by <see cref="GraphDispatch"/>: the
/// kernel body then inlines into the graph walk instead of being chosen again for every pair.
/// </remarks>
internal interface IGraphDistance
{
    static abstract float Between(ref float a, ref float b, int dimension);
}

/// <summary>Squared Euclidean distance.</summary>
internal readonly struct SquaredEuclideanGraphDistance<TLane> : IGraphDistance
    where TLane : struct, IVectorLane<TLane>
{
    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static float Between(ref float a, ref float b, int dimension)
        => ManyKernel.One<SquaredDifferenceStep, TLane>(ref a, ref b, dimension);
}

/// <summary>Negated dot product.</summary>
internal readonly struct InnerProductGraphDistance<TLane> : IGraphDistance
    where TLane : struct, IVectorLane<TLane>
{
    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static float Between(ref float a, ref float b, int dimension)
        => -ManyKernel.One<DotStep, TLane>(ref a, ref b, dimension);
}

/// <summary>One minus the dot product of unit vectors.</summary>
internal readonly struct CosineGraphDistance<TLane> : IGraphDistance
    where TLane : struct, IVectorLane<TLane>
{
    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static float Between(ref float a, ref float b, int dimension)
        => 1f - ManyKernel.One<DotStep, TLane>(ref a, ref b, dimension);
}

/// <summary>An operation of the graph index that runs with one concrete distance (metric and SIMD width).</summary>
internal interface IGraphAction<TResult>
{
    TResult Run<TDistance>()
        where TDistance : struct, IGraphDistance;
}

/// <summary>Resolves a metric and the kernel width for a dimension into one concrete <see cref="IGraphDistance"/>.</summary>
internal static class GraphDispatch
{
    public static TResult Run<TAction, TResult>(DistanceMetric metric, KernelPath path, ref TAction action)
        where TAction : struct, IGraphAction<TResult>, allows ref struct
    {
        return metric switch
        {
            DistanceMetric.SquaredEuclidean => path switch
            {
                KernelPath.Vector512 => action.Run<SquaredEuclideanGraphDistance<Lane512>>(),
                KernelPath.Vector256 => action.Run<SquaredEuclideanGraphDistance<Lane256>>(),
                KernelPath.Vector128 => action.Run<SquaredEuclideanGraphDistance<Lane128>>(),
                _ => action.Run<SquaredEuclideanGraphDistance<LaneScalar>>(),
            },
            DistanceMetric.InnerProduct => path switch
            {
                KernelPath.Vector512 => action.Run<InnerProductGraphDistance<Lane512>>(),
                KernelPath.Vector256 => action.Run<InnerProductGraphDistance<Lane256>>(),
                KernelPath.Vector128 => action.Run<InnerProductGraphDistance<Lane128>>(),
                _ => action.Run<InnerProductGraphDistance<LaneScalar>>(),
            },
            _ => path switch
            {
                KernelPath.Vector512 => action.Run<CosineGraphDistance<Lane512>>(),
                KernelPath.Vector256 => action.Run<CosineGraphDistance<Lane256>>(),
                KernelPath.Vector128 => action.Run<CosineGraphDistance<Lane128>>(),
                _ => action.Run<CosineGraphDistance<LaneScalar>>(),
            },
        };
    }
}
