using VectorKit.Distance.Kernels;

namespace VectorKit.Distance;

/// <summary>An operation written once, generic over a metric's accumulate step and finish.</summary>
/// <typeparam name="TResult">What the operation returns.</typeparam>
internal interface IMetricAction<TResult>
{
    TResult Run<TStep, TFinish>()
        where TStep : struct, IAccumulateStep
        where TFinish : struct, IDistanceFinish;
}

/// <summary>
/// The one place a <see cref="DistanceMetric"/> becomes a step and a finish: every index resolves its metric here,
/// once per operation, and the generic operation then inlines both into its loops.
/// </summary>
internal static class MetricDispatch
{
    public static TResult Run<TAction, TResult>(DistanceMetric metric, ref TAction action)
        where TAction : struct, IMetricAction<TResult>, allows ref struct
        => metric switch
        {
            DistanceMetric.SquaredEuclidean => action.Run<SquaredDifferenceStep, KeepSum>(),
            DistanceMetric.InnerProduct => action.Run<DotStep, NegateSum>(),
            _ => action.Run<DotStep, OneMinusSum>(),
        };
}
