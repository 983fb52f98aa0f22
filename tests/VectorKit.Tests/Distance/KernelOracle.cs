using MathNet.Numerics.LinearAlgebra.Double;
using VectorKit.Distance.Kernels;

namespace VectorKit.Tests.Distance;

/// <summary>
/// The independent reference for the kernel tests: double-precision results from MathNet.Numerics, and the error
/// bound a float32 kernel must stay within.
/// </summary>
/// <remarks>
/// <para><b>Error bound.</b> A float sum of n products, in any order (pairwise, several partial sums, lane by lane,
/// then a horizontal reduction) satisfies |computed − exact| ≤ γₙ Σ|xᵢyᵢ| with γₙ = n·u / (1 − n·u) and
/// u = 2⁻²⁴ (reference: Higham, <i>Accuracy and Stability of Numerical Algorithms</i>, 2nd ed., ch. 3, the bound for
/// inner products, from memory). It holds because each product passes through at most n roundings on its way to the
/// result; an FMA only removes roundings. For n ≤ 1536, n·u &lt; 10⁻⁴, so γₙ ≈ n·u. The final rounding of the result
/// adds at most u·|result| ≤ u·Σ|terms|, and squared L2 rounds each difference once before squaring (2u relative per
/// term), so the tests allow <c>Safety · (n + 2) · u · Σ|terms|</c>. <see cref="Safety"/> = 2 covers the
/// 1/(1 − n·u) factor and the double reference's own rounding (about 2⁻⁵³ relative, negligible).</para>
/// <para>The bound is a worst case; on random data the error is typically near √n·u·Σ|terms| (a rule of thumb,
/// common practice), far inside it.</para>
/// </remarks>
internal static class KernelOracle
{
    public const double Unit = 1.0 / (1 << 24);
    public const double Safety = 2.0;

    /// <summary>Dimensions that sit on and beside every lane width (1, 4, 8, 16 floats) and the 2- and 4-lane unrolls, plus common embedding sizes.</summary>
    public static TheoryData<int> Dimensions => new() { 1, 2, 3, 7, 8, 15, 16, 17, 31, 64, 127, 128, 129, 384, 768, 784, 1536 };

    /// <summary>Every kernel path this process can run: Scalar up to <see cref="KernelDispatch.Widest"/>.</summary>
    public static IEnumerable<KernelPath> Paths()
    {
        for (KernelPath path = KernelPath.Scalar; path <= KernelDispatch.Widest; path++)
        {
            Assert.True(KernelDispatch.IsSupported(path));
            yield return path;
        }
    }

    /// <summary>Uniform values in [−1, 1), reproducible from <paramref name="seed"/>.</summary>
    public static float[] Random(int count, int seed)
    {
        var random = new Random(seed);
        var values = new float[count];
        for (int i = 0; i < values.Length; i++)
        {
            values[i] = (float)((random.NextDouble() * 2) - 1);
        }

        return values;
    }

    public static double[] ToDouble(ReadOnlySpan<float> values)
    {
        var result = new double[values.Length];
        for (int i = 0; i < values.Length; i++)
        {
            result[i] = values[i];
        }

        return result;
    }

    // Reference: MathNet.Numerics 5.0.0 double-precision DenseVector.DotProduct.
    public static double Dot(ReadOnlySpan<float> x, ReadOnlySpan<float> y)
        => x.IsEmpty ? 0 : DenseVector.OfArray(ToDouble(x)).DotProduct(DenseVector.OfArray(ToDouble(y)));

    // Reference: MathNet.Numerics 5.0.0 Distance.SSD (sum of squared differences) in double precision.
    public static double SquaredEuclidean(ReadOnlySpan<float> x, ReadOnlySpan<float> y)
        => x.IsEmpty ? 0 : MathNet.Numerics.Distance.SSD(ToDouble(x), ToDouble(y));

    // Reference: MathNet.Numerics 5.0.0 Distance.Cosine, which returns 1 − cos(x, y), in double precision.
    public static double CosineSimilarity(ReadOnlySpan<float> x, ReadOnlySpan<float> y)
        => 1 - MathNet.Numerics.Distance.Cosine(ToDouble(x), ToDouble(y));

    /// <summary>Σ|xᵢyᵢ| in double: the scale of a dot product's rounding error.</summary>
    public static double AbsoluteProductSum(ReadOnlySpan<float> x, ReadOnlySpan<float> y)
    {
        double sum = 0;
        for (int i = 0; i < x.Length; i++)
        {
            sum += Math.Abs((double)x[i] * y[i]);
        }

        return sum;
    }

    /// <summary>The allowed error of a float sum of <paramref name="n"/> terms whose absolute values sum to <paramref name="termScale"/>.</summary>
    public static double Tolerance(int n, double termScale) => Safety * (n + 2) * Unit * termScale;

    public static void AssertDot(double expected, float actual, ReadOnlySpan<float> x, ReadOnlySpan<float> y, string context)
        => AssertWithin(expected, actual, Tolerance(x.Length, AbsoluteProductSum(x, y)), context);

    public static void AssertSquaredEuclidean(double expected, float actual, int n, string context)
        => AssertWithin(expected, actual, Tolerance(n, expected), context);

    /// <summary>
    /// Cosine: the dot's error over ‖x‖‖y‖ is at most γₙ (Cauchy–Schwarz: Σ|xᵢyᵢ| ≤ ‖x‖‖y‖), each norm adds γₙ/2
    /// relative, and the division and square root a few u: within <c>2 · Tolerance(n, 1)</c> absolute.
    /// </summary>
    public static void AssertCosine(double expected, float actual, int n, string context)
        => AssertWithin(expected, actual, 2 * Tolerance(n, 1.0), context);

    public static void AssertWithin(double expected, float actual, double tolerance, string context)
    {
        double error = Math.Abs(actual - expected);
        Assert.True(error <= tolerance, $"{context}: got {actual:R}, reference {expected:R}, error {error:E3} > bound {tolerance:E3}.");
    }

    public static void AssertBitIdentical(float expected, float actual, string context)
        => Assert.True(
            BitConverter.SingleToInt32Bits(expected) == BitConverter.SingleToInt32Bits(actual),
            $"{context}: {actual:R} differs from {expected:R} in its bits.");
}
