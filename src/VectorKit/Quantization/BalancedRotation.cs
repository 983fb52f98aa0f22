using System.Numerics.Tensors;

namespace VectorKit.Quantization;

/// <summary>
/// Learns and applies the variance-balancing rotation of <see cref="SubspaceRotation.VarianceBalanced"/>: a
/// <c>d × d</c> orthogonal matrix R, row-major in float, whose row <c>m·s + t</c> is the principal direction placed at
/// component t of sub-space m; a vector x is quantized as <c>y = R·x</c> and reconstructed as <c>x = Rᵀ·y</c>.
/// </summary>
internal static class BalancedRotation
{
    // Rows per block of the covariance accumulation: a block's transposed columns stay in cache while every pair of
    // them is dotted in float, and each block's sums are added in double, so rounding does not grow with the sample.
    private const int CovarianceBlock = 256;

    /// <summary>
    /// The rotation for <paramref name="subspaces"/> sub-spaces from the covariance of <paramref name="rows"/> rows:
    /// eigenvectors by decreasing eigenvalue, each to the unfilled sub-space whose eigenvalue product is smallest so
    /// far (after seeding each sub-space with one of the largest), as published by Ge, He, Ke &amp; Sun (CVPR 2013).
    /// </summary>
    public static float[] Learn(ReadOnlySpan<float> sample, int rows, int d, int subspaces, int parallelism, CancellationToken cancellationToken)
    {
        double[] covariance = Covariance(sample, rows, d, parallelism, cancellationToken);
        var eigenvalues = new double[d];
        SymmetricEigen.Decompose(covariance, d, eigenvalues, cancellationToken);

        int s = d / subspaces;
        var logProduct = new double[subspaces];
        var filled = new int[subspaces];
        var rotation = new float[d * d];

        // Zero-variance directions (constant pixels) would make a product 0 and its log −∞: floor them far below the
        // largest eigenvalue, so they still count as "nearly nothing" but comparisons stay finite.
        double floor = Math.Max(eigenvalues[d - 1], 1e-300) * 1e-12;
        for (int rank = 0; rank < d; rank++)
        {
            int k = d - 1 - rank;
            int bucket;
            if (rank < subspaces)
            {
                bucket = rank;
            }
            else
            {
                bucket = -1;
                for (int b = 0; b < subspaces; b++)
                {
                    if (filled[b] < s && (bucket < 0 || logProduct[b] < logProduct[bucket]))
                    {
                        bucket = b;
                    }
                }
            }

            logProduct[bucket] += Math.Log(Math.Max(eigenvalues[k], floor));
            Span<float> target = rotation.AsSpan(((bucket * s) + filled[bucket]++) * d, d);
            ReadOnlySpan<double> vector = covariance.AsSpan(k * d, d);
            for (int j = 0; j < d; j++)
            {
                target[j] = (float)vector[j];
            }
        }

        return rotation;
    }

    /// <summary><c>y = R·x</c>.</summary>
    public static void Rotate(float[] rotation, ReadOnlySpan<float> x, Span<float> y)
    {
        int d = x.Length;
        for (int i = 0; i < d; i++)
        {
            y[i] = TensorPrimitives.Dot(rotation.AsSpan(i * d, d), x);
        }
    }

    /// <summary><c>x = Rᵀ·y</c>, the inverse of <see cref="Rotate"/> for an orthogonal R.</summary>
    public static void RotateBack(float[] rotation, ReadOnlySpan<float> y, Span<float> x)
    {
        int d = y.Length;
        x[..d].Clear();
        for (int i = 0; i < d; i++)
        {
            TensorPrimitives.MultiplyAdd(rotation.AsSpan(i * d, d), y[i], x[..d], x[..d]);
        }
    }

    /// <summary>Rotates every row of <paramref name="rows"/> (row-major, dimension d) in parallel into a new array.</summary>
    public static float[] RotateRows(float[] rotation, ReadOnlySpan<float> rows, int d, int parallelism, CancellationToken cancellationToken)
    {
        float[] source = rows.ToArray();
        var result = new float[source.Length];
        int n = source.Length / d;
        const int Block = 256;
        var parallel = new ParallelOptions { MaxDegreeOfParallelism = parallelism, CancellationToken = cancellationToken };
        Parallel.For(0, (n + Block - 1) / Block, parallel, b =>
        {
            int end = Math.Min(n, (b + 1) * Block);
            for (int r = b * Block; r < end; r++)
            {
                Rotate(rotation, source.AsSpan(r * d, d), result.AsSpan(r * d, d));
            }
        });
        return result;
    }

    /// <summary>Checks a stored rotation: <c>d × d</c> finite values with rows of unit length (full orthogonality is not re-verified, an O(d³) check).</summary>
    /// <exception cref="InvalidDataException">A value is not finite, or a row's length is off by more than 10⁻³.</exception>
    public static void Check(float[] rotation, int d)
    {
        if (rotation.Length != (long)d * d)
        {
            throw new InvalidDataException($"the rotation holds {rotation.Length} floats; dimension {d} needs {(long)d * d}");
        }

        for (int i = 0; i < d; i++)
        {
            ReadOnlySpan<float> row = rotation.AsSpan(i * d, d);
            double norm = 0;
            for (int j = 0; j < d; j++)
            {
                if (!float.IsFinite(row[j]))
                {
                    throw new InvalidDataException($"rotation row {i}, column {j} is {row[j].ToString(System.Globalization.CultureInfo.InvariantCulture)}; the rotation must be finite");
                }

                norm += (double)row[j] * row[j];
            }

            if (Math.Abs(norm - 1) > 1e-3)
            {
                throw new InvalidDataException($"rotation row {i} has squared length {norm.ToString("G6", System.Globalization.CultureInfo.InvariantCulture)}; an orthogonal rotation has rows of length 1");
            }
        }
    }

    // Covariance about the mean, in double.
    private static double[] Covariance(ReadOnlySpan<float> sample, int rows, int d, int parallelism, CancellationToken cancellationToken)
    {
        var mean = new double[d];
        for (int r = 0; r < rows; r++)
        {
            ReadOnlySpan<float> row = sample.Slice(r * d, d);
            for (int j = 0; j < d; j++)
            {
                mean[j] += row[j];
            }
        }

        for (int j = 0; j < d; j++)
        {
            mean[j] /= rows;
        }

        double[] total = CrossProduct(sample, sample, mean, rows, d, symmetric: true, parallelism, cancellationToken);
        double scale = 1.0 / Math.Max(1, rows - 1);
        for (int i = 0; i < total.Length; i++)
        {
            total[i] *= scale;
        }

        return total;
    }

    /// <summary>
    /// <c>Σ_r (a_r − mean)ᵢ · (b_r − mean)ⱼ</c> for all i, j (d × d, row-major, double); <paramref name="mean"/> null means
    /// zero. Blocks of rows are transposed to float columns and their column pairs dotted with the SIMD kernel; blocks
    /// run in order and rows of the result in parallel, so every sum is accumulated in the same order on any number of
    /// threads and the result is reproducible. With <paramref name="symmetric"/> (a = b) only the lower triangle is
    /// computed and then mirrored.
    /// </summary>
    private static double[] CrossProduct(ReadOnlySpan<float> a, ReadOnlySpan<float> b, double[]? mean, int rows, int d, bool symmetric, int parallelism, CancellationToken cancellationToken)
    {
        var total = new double[d * d];
        var left = new float[d * CovarianceBlock];
        float[] right = symmetric ? left : new float[d * CovarianceBlock];
        var parallel = new ParallelOptions { MaxDegreeOfParallelism = parallelism, CancellationToken = cancellationToken };
        for (int start = 0; start < rows; start += CovarianceBlock)
        {
            cancellationToken.ThrowIfCancellationRequested();
            int count = Math.Min(CovarianceBlock, rows - start);
            Transpose(a, mean, start, count, d, left);
            if (!symmetric)
            {
                Transpose(b, mean, start, count, d, right);
            }

            Parallel.For(0, d, parallel, i =>
            {
                ReadOnlySpan<float> x = left.AsSpan(i * CovarianceBlock, count);
                Span<double> sums = total.AsSpan(i * d, symmetric ? i + 1 : d);
                for (int j = 0; j < sums.Length; j++)
                {
                    sums[j] += TensorPrimitives.Dot(x, right.AsSpan(j * CovarianceBlock, count));
                }
            });
        }

        if (symmetric)
        {
            for (int i = 0; i < d; i++)
            {
                for (int j = 0; j < i; j++)
                {
                    total[(j * d) + i] = total[(i * d) + j];
                }
            }
        }

        return total;
    }

    private static void Transpose(ReadOnlySpan<float> rows, double[]? mean, int start, int count, int d, float[] columns)
    {
        for (int r = 0; r < count; r++)
        {
            ReadOnlySpan<float> row = rows.Slice((start + r) * d, d);
            for (int j = 0; j < d; j++)
            {
                columns[(j * CovarianceBlock) + r] = mean is null ? row[j] : (float)(row[j] - mean[j]);
            }
        }
    }
}
