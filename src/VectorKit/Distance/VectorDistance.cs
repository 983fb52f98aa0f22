using System.Runtime.InteropServices;
using VectorKit.Distance.Kernels;

namespace VectorKit.Distance;

/// <summary>SIMD distance kernels over float32 spans: dot product, squared Euclidean distance and cosine.</summary>
/// <remarks>
/// <para>Each call runs at the widest SIMD width the process supports (512, 256 or 128 bits, else scalar), chosen once
/// per process; vectors shorter than one lane use a narrower one. Results are deterministic for a given width and
/// length: the summation order never depends on buffer alignment.</para>
/// <para><b>Accuracy.</b> Sums are accumulated in float32 in a few interleaved partial sums (a pairwise-like order),
/// so the error against an exact sum is at most about <c>n · 2⁻²⁴ · Σ|terms|</c> and typically far less.</para>
/// <para><b>NaN.</b> A NaN or infinite component propagates into the result as IEEE arithmetic dictates; these
/// functions do not validate values (the indexes do, at their boundary).</para>
/// <para>All members are thread-safe: they keep no state.</para>
/// </remarks>
public static class VectorDistance
{
    /// <summary>The dot product <c>Σ x[i]·y[i]</c>.</summary>
    /// <param name="x">The first vector.</param>
    /// <param name="y">The second vector, of the same length.</param>
    /// <returns>The dot product; 0 for empty spans.</returns>
    /// <exception cref="ArgumentException">The lengths differ.</exception>
    public static float Dot(ReadOnlySpan<float> x, ReadOnlySpan<float> y) => Dot(KernelDispatch.Widest, x, y);

    /// <summary>The squared Euclidean distance <c>Σ (x[i] − y[i])²</c>.</summary>
    /// <param name="x">The first vector.</param>
    /// <param name="y">The second vector, of the same length.</param>
    /// <returns>The squared distance; 0 for empty spans.</returns>
    /// <exception cref="ArgumentException">The lengths differ.</exception>
    public static float SquaredEuclidean(ReadOnlySpan<float> x, ReadOnlySpan<float> y) => SquaredEuclidean(KernelDispatch.Widest, x, y);

    /// <summary>The cosine similarity <c>x·y / (‖x‖ ‖y‖)</c>, computed in one fused pass.</summary>
    /// <param name="x">The first vector.</param>
    /// <param name="y">The second vector, of the same length.</param>
    /// <returns>A value in [−1, 1] up to rounding; NaN when either vector is zero (or the spans are empty).</returns>
    /// <exception cref="ArgumentException">The lengths differ.</exception>
    public static float CosineSimilarity(ReadOnlySpan<float> x, ReadOnlySpan<float> y) => CosineSimilarity(KernelDispatch.Widest, x, y);

    /// <summary>The distance between two vectors under <paramref name="metric"/>, smaller is better (see <see cref="DistanceMetric"/>).</summary>
    /// <param name="metric">The metric.</param>
    /// <param name="x">The first vector.</param>
    /// <param name="y">The second vector, of the same length.</param>
    /// <returns><c>Σ(x−y)²</c>, <c>−x·y</c> or <c>1 − cos(x, y)</c>.</returns>
    /// <exception cref="ArgumentException">The lengths differ.</exception>
    /// <exception cref="ArgumentOutOfRangeException"><paramref name="metric"/> is not a defined value.</exception>
    public static float Compute(DistanceMetric metric, ReadOnlySpan<float> x, ReadOnlySpan<float> y) => metric switch
    {
        DistanceMetric.SquaredEuclidean => SquaredEuclidean(x, y),
        DistanceMetric.InnerProduct => -Dot(x, y),
        DistanceMetric.Cosine => 1f - CosineSimilarity(x, y),
        _ => ThrowUndefinedMetric(metric),
    };

    /// <summary>
    /// The distances from one query to many vectors stored row after row, under <paramref name="metric"/>.
    /// Much faster per vector than one <see cref="Compute"/> call per pair: rows are processed in groups sharing query loads.
    /// </summary>
    /// <param name="metric">The metric.</param>
    /// <param name="query">The query, of dimension <c>d</c> (at least 1).</param>
    /// <param name="vectors">The vectors, row after row: a multiple of <c>d</c> components.</param>
    /// <param name="distances">Receives one distance per row: exactly <c>vectors.Length / d</c> elements.</param>
    /// <exception cref="ArgumentException">The query is empty, <paramref name="vectors"/> is not a multiple of its length, or <paramref name="distances"/> has the wrong length.</exception>
    /// <exception cref="ArgumentOutOfRangeException"><paramref name="metric"/> is not a defined value.</exception>
    public static void ComputeMany(DistanceMetric metric, ReadOnlySpan<float> query, ReadOnlySpan<float> vectors, Span<float> distances)
    {
        int d = query.Length;
        if (d == 0)
        {
            ThrowHelper.ThrowArgument(nameof(query), "The query is empty; it needs at least one component.");
        }

        if (vectors.Length % d != 0)
        {
            ThrowHelper.ThrowArgument(nameof(vectors), $"vectors has {vectors.Length} components, not a multiple of the query dimension {d}.");
        }

        int rows = vectors.Length / d;
        if (distances.Length != rows)
        {
            ThrowHelper.ThrowArgument(nameof(distances), $"distances has {distances.Length} elements; {rows} rows need exactly {rows}.");
        }

        ref float q = ref MemoryMarshal.GetReference(query);
        ref float x = ref MemoryMarshal.GetReference(vectors);
        ref float result = ref MemoryMarshal.GetReference(distances);
        switch (metric)
        {
            case DistanceMetric.SquaredEuclidean:
                ManyKernel.Compute<SquaredDifferenceStep>(KernelDispatch.Widest, ref q, ref x, d, rows, ref result);
                break;
            case DistanceMetric.InnerProduct:
                ManyKernel.Compute<DotStep>(KernelDispatch.Widest, ref q, ref x, d, rows, ref result);
                foreach (ref float value in distances)
                {
                    value = -value;
                }

                break;
            case DistanceMetric.Cosine:
                // Rows are not known to be normalised here, so each needs its own norm: the fused pair kernel.
                for (int r = 0; r < rows; r++)
                {
                    distances[r] = 1f - CosineSimilarity(KernelDispatch.Widest, query, vectors.Slice(r * d, d));
                }

                break;
            default:
                ThrowUndefinedMetric(metric);
                break;
        }
    }

    internal static float Dot(KernelPath widest, ReadOnlySpan<float> x, ReadOnlySpan<float> y)
    {
        CheckLengths(x, y);
        return PairKernel.Sum<DotStep>(widest, x, y);
    }

    internal static float SquaredEuclidean(KernelPath widest, ReadOnlySpan<float> x, ReadOnlySpan<float> y)
    {
        CheckLengths(x, y);
        return PairKernel.Sum<SquaredDifferenceStep>(widest, x, y);
    }

    internal static float CosineSimilarity(KernelPath widest, ReadOnlySpan<float> x, ReadOnlySpan<float> y)
    {
        CheckLengths(x, y);
        PairKernel.CosineParts(widest, x, y, out float dot, out float xx, out float yy);

        // Two float roots rather than one root of xx·yy: the product can overflow float for large finite vectors,
        // and the roots run in parallel, where a double division and root would add a fixed ~10 ns at small d.
        return dot / (MathF.Sqrt(xx) * MathF.Sqrt(yy));
    }

    private static void CheckLengths(ReadOnlySpan<float> x, ReadOnlySpan<float> y)
    {
        if (x.Length != y.Length)
        {
            ThrowHelper.ThrowArgument(nameof(y), $"The vectors have different lengths: {x.Length} and {y.Length}.");
        }
    }

    private static float ThrowUndefinedMetric(DistanceMetric metric)
    {
        ThrowHelper.ThrowArgumentOutOfRange(nameof(metric), metric, "must be SquaredEuclidean, InnerProduct or Cosine");
        return 0f;
    }
}
