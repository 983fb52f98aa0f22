using System.Runtime.CompilerServices;

namespace VectorKit.Distance.Kernels;

/// <summary>One step of a sum over components: folds a lane of query and stored components into an accumulator.</summary>
/// <remarks>Written once per metric and reused by every kernel shape (pair, one-against-many) and every width.</remarks>
internal interface IAccumulateStep
{
    static abstract TLane Step<TLane>(TLane accumulator, TLane query, TLane stored)
        where TLane : struct, IVectorLane<TLane>;
}

/// <summary><c>acc + q·x</c>: the dot product.</summary>
internal readonly struct DotStep : IAccumulateStep
{
    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static TLane Step<TLane>(TLane accumulator, TLane query, TLane stored)
        where TLane : struct, IVectorLane<TLane>
        => TLane.MultiplyAdd(query, stored, accumulator);
}

/// <summary><c>acc + (q − x)²</c>: the squared Euclidean distance.</summary>
internal readonly struct SquaredDifferenceStep : IAccumulateStep
{
    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static TLane Step<TLane>(TLane accumulator, TLane query, TLane stored)
        where TLane : struct, IVectorLane<TLane>
    {
        TLane difference = TLane.Subtract(query, stored);
        return TLane.MultiplyAdd(difference, difference, accumulator);
    }
}
