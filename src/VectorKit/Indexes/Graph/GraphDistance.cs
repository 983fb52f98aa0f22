using VectorKit.Distance.Kernels;

namespace VectorKit.Indexes.Graph;

/// <summary>A metric's distance between two rows, smaller is better, bit-identical to what the exact index reports.</summary>
internal interface IGraphDistance
{
    static abstract float Between(ref float a, ref float b, int dimension);
}

/// <summary>Squared Euclidean distance.</summary>
internal readonly struct SquaredEuclideanGraphDistance : IGraphDistance
{
    public static float Between(ref float a, ref float b, int dimension)
        => ManyKernel.One<SquaredDifferenceStep>(KernelDispatch.Widest, ref a, ref b, dimension);
}

/// <summary>Negated dot product.</summary>
internal readonly struct InnerProductGraphDistance : IGraphDistance
{
    public static float Between(ref float a, ref float b, int dimension)
        => -ManyKernel.One<DotStep>(KernelDispatch.Widest, ref a, ref b, dimension);
}

/// <summary>One minus the dot product of unit vectors.</summary>
internal readonly struct CosineGraphDistance : IGraphDistance
{
    public static float Between(ref float a, ref float b, int dimension)
        => 1f - ManyKernel.One<DotStep>(KernelDispatch.Widest, ref a, ref b, dimension);
}
