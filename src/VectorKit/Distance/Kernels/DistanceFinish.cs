using System.Runtime.CompilerServices;

namespace VectorKit.Distance.Kernels;

/// <summary>
/// How a metric turns a kernel's step-sum into a distance, smaller is better: squared Euclidean keeps the sum, inner
/// product negates it, cosine takes one minus the dot product of unit vectors. Every search path finishes through
/// these, so the same pair gets the same number everywhere.
/// </summary>
internal interface IDistanceFinish
{
    /// <summary>The distance from the metric's step-sum (<see cref="SquaredDifferenceStep"/> or <see cref="DotStep"/>).</summary>
    static abstract float Apply(float sum);

    /// <summary>The distance from a dot product, for the blocked kernel (squared Euclidean expands ‖q‖² + ‖x‖² − 2 q·x).</summary>
    static abstract float FromDot(float dot, float querySquaredNorm, float rowSquaredNorm);

    /// <summary>
    /// Twice the largest possible gap between <see cref="FromDot"/> and <see cref="Apply"/> of the step-sum for the same
    /// pair, given the per-sum relative error bound γ.
    /// </summary>
    /// <remarks>
    /// A float sum of products errs by at most γ·Σ|terms| (γ ≈ terms-per-lane-chain × 2⁻²⁴; Higham, Accuracy and
    /// Stability of Numerical Algorithms, ch. 3). Cauchy–Schwarz bounds Σ|q_i x_i| by ‖q‖‖x‖ and Σ(q_i − x_i)²
    /// by 2(‖q‖² + ‖x‖²); the largest stored norm stands in for every row's.
    /// </remarks>
    static abstract float Margin(double gamma, float querySquaredNorm, float largestRowSquaredNorm);
}

/// <summary>The unit roundoff of float32, for the error margins.</summary>
internal static class Float32Rounding
{
    public const double Unit = 1.0 / (1 << 24);
}

/// <summary>Squared Euclidean distance: the sum of squared differences as is.</summary>
internal readonly struct KeepSum : IDistanceFinish
{
    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static float Apply(float sum) => sum;

    public static float FromDot(float dot, float querySquaredNorm, float rowSquaredNorm) => querySquaredNorm + rowSquaredNorm - (2f * dot);

    // Expansion: the three sums (γ each) and two additions (2⁻²⁴ each) over ≤ 2(‖q‖² + ‖x‖²); differences: γ over the same.
    public static float Margin(double gamma, float querySquaredNorm, float largestRowSquaredNorm)
        => (float)(2 * ((4 * gamma) + (4 * Float32Rounding.Unit)) * ((double)querySquaredNorm + largestRowSquaredNorm));
}

/// <summary>Inner product: the negated dot product.</summary>
internal readonly struct NegateSum : IDistanceFinish
{
    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static float Apply(float sum) => -sum;

    public static float FromDot(float dot, float querySquaredNorm, float rowSquaredNorm) => -dot;

    public static float Margin(double gamma, float querySquaredNorm, float largestRowSquaredNorm)
        => (float)(2 * (2 * gamma) * Math.Sqrt((double)querySquaredNorm * largestRowSquaredNorm));
}

/// <summary>Cosine: one minus the dot product of unit vectors.</summary>
internal readonly struct OneMinusSum : IDistanceFinish
{
    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static float Apply(float sum) => 1f - sum;

    public static float FromDot(float dot, float querySquaredNorm, float rowSquaredNorm) => 1f - dot;

    // Unit vectors (to within rounding, hence 1.01), plus the rounding of 1 − dot on each side.
    public static float Margin(double gamma, float querySquaredNorm, float largestRowSquaredNorm)
        => (float)(2 * ((2 * gamma * 1.01) + (4 * Float32Rounding.Unit)));
}
