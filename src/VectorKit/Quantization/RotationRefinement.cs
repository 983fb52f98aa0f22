using System.Numerics.Tensors;

namespace VectorKit.Quantization;

/// <summary>
/// The non-parametric refinement of optimised product quantization (Ge, He, Ke &amp; Sun, CVPR 2013): starting from a
/// rotation and codebooks, alternate (1) one Lloyd step of every sub-space codebook on the rotated rows and (2) the
/// orthogonal Procrustes update of the rotation, <c>R = argmin_R Σ‖R·x − y‖²</c> over orthogonal R with y the rows'
/// reconstructions, solved by the polar factor of <c>Σ y·xᵀ</c> (Schönemann, Psychometrika 1966). Each step can only
/// lower the training error, so the result is never worse on the training rows than its starting point.
/// </summary>
internal static class RotationRefinement
{
    /// <summary>
    /// Runs <paramref name="rounds"/> rounds; <paramref name="rotation"/> and <paramref name="codewords"/> are updated in
    /// place (codewords end matched to the final rotation).
    /// </summary>
    public static void Refine(float[] rotation, float[] codewords, float[] sample, int d, int codeBytes, int rounds, int parallelism, CancellationToken cancellationToken)
    {
        int rows = sample.Length / d;
        float[] rotated = BalancedRotation.RotateRows(rotation, sample, d, parallelism, cancellationToken);
        var codes = new byte[rows * codeBytes];
        var reconstruction = new float[rows * d];
        for (int round = 0; round < rounds; round++)
        {
            LloydStep(rotated, codewords, codes, d, codeBytes, parallelism, cancellationToken);
            Reconstruct(codewords, codes, reconstruction, d, codeBytes);

            // Σ y·xᵀ (row i, column j: Σ_r y_ri·x_rj); its polar factor maps x onto y as closely as a rotation can.
            double[] cross = BalancedRotation.CrossProduct(reconstruction, sample, null, rows, d, symmetric: false, parallelism, cancellationToken);
            float[] next = PolarFactor(cross, d, rotation, cancellationToken);
            next.CopyTo(rotation, 0);
            rotated = BalancedRotation.RotateRows(rotation, sample, d, parallelism, cancellationToken);
        }

        LloydStep(rotated, codewords, codes, d, codeBytes, parallelism, cancellationToken);
    }

    /// <summary>
    /// The orthogonal polar factor Q of A (d × d, row-major): A = Q·P with P symmetric positive semi-definite, i.e.
    /// <c>Q = Σ_j v_j·u_jᵀ</c> over the singular triplets (σ_j, u_j right, v_j = A·u_j / σ_j left). Right vectors come
    /// from the eigendecomposition of AᵀA. Where σ_j is negligible (A rank-deficient, e.g. constant pixels), v_j is
    /// taken from <paramref name="previous"/> (<c>previous·u_j</c>) so the rotation keeps its action there; every v_j is
    /// orthonormalised (Gram-Schmidt, twice, in double) against the ones before it, largest σ first.
    /// </summary>
    internal static float[] PolarFactor(double[] a, int d, float[]? previous, CancellationToken cancellationToken)
    {
        var transposed = new double[d * d];
        for (int i = 0; i < d; i++)
        {
            for (int j = 0; j < d; j++)
            {
                transposed[(j * d) + i] = a[(i * d) + j];
            }
        }

        // AᵀA[i, j] = Σ_k A[k, i]·A[k, j] = row i of Aᵀ · row j of Aᵀ.
        var gram = new double[d * d];
        Parallel.For(0, d, new ParallelOptions { CancellationToken = cancellationToken }, i =>
        {
            ReadOnlySpan<double> row = transposed.AsSpan(i * d, d);
            for (int j = 0; j <= i; j++)
            {
                gram[(i * d) + j] = TensorPrimitives.Dot(row, transposed.AsSpan(j * d, d));
            }
        });

        for (int i = 0; i < d; i++)
        {
            for (int j = 0; j < i; j++)
            {
                gram[(j * d) + i] = gram[(i * d) + j];
            }
        }

        var squares = new double[d];
        SymmetricEigen.Decompose(gram, d, squares, cancellationToken);
        double largest = Math.Sqrt(Math.Max(0, squares[d - 1]));
        // v_j and u_j side by side, largest σ first (Aᵀ is no longer needed, so its array holds the u_j).
        var left = new double[d * d];
        double[] right = transposed;
        var candidate = new double[d];
        int accepted = 0;
        for (int j = d - 1; j >= 0; j--)
        {
            cancellationToken.ThrowIfCancellationRequested();
            ReadOnlySpan<double> u = gram.AsSpan(j * d, d);
            double sigma = Math.Sqrt(Math.Max(0, squares[j]));
            if (sigma > 1e-6 * largest && largest > 0)
            {
                for (int i = 0; i < d; i++)
                {
                    candidate[i] = TensorPrimitives.Dot(a.AsSpan(i * d, d), u) / sigma;
                }
            }
            else
            {
                for (int i = 0; i < d; i++)
                {
                    candidate[i] = previous is null ? u[i] : Dot(previous.AsSpan(i * d, d), u);
                }
            }

            if (!Orthonormalize(candidate, left, accepted, d))
            {
                // Fully inside the span already: fall back to the first basis vector that is not.
                for (int basis = 0; basis < d; basis++)
                {
                    candidate.AsSpan().Clear();
                    candidate[basis] = 1;
                    if (Orthonormalize(candidate, left, accepted, d))
                    {
                        break;
                    }
                }
            }

            candidate.CopyTo(left.AsSpan(accepted * d, d));
            u.CopyTo(right.AsSpan(accepted * d, d));
            accepted++;
        }

        // Q[i, k] = Σ_j v_j[i]·u_j[k].
        var q = new float[d * d];
        Parallel.For(0, d, new ParallelOptions { CancellationToken = cancellationToken }, i =>
        {
            var row = new double[d];
            for (int j = 0; j < d; j++)
            {
                double v = left[(j * d) + i];
                if (v != 0)
                {
                    TensorPrimitives.MultiplyAdd(right.AsSpan(j * d, d), v, row, row);
                }
            }

            for (int k = 0; k < d; k++)
            {
                q[(i * d) + k] = (float)row[k];
            }
        });
        return q;
    }

    // Removes from v its components along the first `count` rows of basis (twice, for orthogonality to working
    // precision), then normalises; false when too little of v is left.
    private static bool Orthonormalize(double[] v, double[] basis, int count, int d)
    {
        double before = Math.Sqrt(TensorPrimitives.Dot<double>(v, v));
        for (int pass = 0; pass < 2; pass++)
        {
            for (int b = 0; b < count; b++)
            {
                ReadOnlySpan<double> e = basis.AsSpan(b * d, d);
                double projection = TensorPrimitives.Dot(e, v);
                TensorPrimitives.MultiplyAdd(e, -projection, v, v);
            }
        }

        double norm = Math.Sqrt(TensorPrimitives.Dot<double>(v, v));
        if (!(norm > 1e-3 * before) || norm == 0)
        {
            return false;
        }

        TensorPrimitives.Divide(v, norm, v);
        return true;
    }

    private static double Dot(ReadOnlySpan<float> a, ReadOnlySpan<double> b)
    {
        double sum = 0;
        for (int i = 0; i < a.Length; i++)
        {
            sum += a[i] * b[i];
        }

        return sum;
    }

    // Assigns every rotated sub-vector to its nearest codeword (through the quantizer's SIMD table, rows in parallel),
    // then moves each codeword to the mean of its rows (one that drew none stays where it is); sums in double, rows in
    // order, so the step is reproducible.
    private static void LloydStep(float[] rotated, float[] codewords, byte[] codes, int d, int codeBytes, int parallelism, CancellationToken cancellationToken)
    {
        int rows = rotated.Length / d;
        int s = d / codeBytes;
        const int K = ProductQuantizer.CodewordsPerSubspace;
        ProductQuantizer quantizer = ProductQuantizer.FromCodewords((float[])codewords.Clone(), d, codeBytes);
        var parallel = new ParallelOptions { MaxDegreeOfParallelism = parallelism, CancellationToken = cancellationToken };
        const int Block = 256;
        Parallel.For(0, (rows + Block - 1) / Block, parallel, () => new float[quantizer.TableLength], (b, _, table) =>
        {
            int end = Math.Min(rows, (b + 1) * Block);
            for (int r = b * Block; r < end; r++)
            {
                quantizer.EncodeUnchecked(rotated.AsSpan(r * d, d), codes.AsSpan(r * codeBytes, codeBytes), table);
            }

            return table;
        }, static _ => { });

        Parallel.For(0, codeBytes, parallel, m =>
        {
            Span<float> book = codewords.AsSpan(m * K * s, K * s);
            var sums = new double[K * s];
            var counts = new int[K];
            for (int r = 0; r < rows; r++)
            {
                int best = codes[(r * codeBytes) + m];
                ReadOnlySpan<float> part = rotated.AsSpan((r * d) + (m * s), s);
                counts[best]++;
                for (int t = 0; t < s; t++)
                {
                    sums[(best * s) + t] += part[t];
                }
            }

            for (int j = 0; j < K; j++)
            {
                if (counts[j] > 0)
                {
                    for (int t = 0; t < s; t++)
                    {
                        book[(j * s) + t] = (float)(sums[(j * s) + t] / counts[j]);
                    }
                }
            }
        });
    }

    private static void Reconstruct(float[] codewords, byte[] codes, float[] reconstruction, int d, int codeBytes)
    {
        int rows = reconstruction.Length / d;
        int s = d / codeBytes;
        for (int r = 0; r < rows; r++)
        {
            for (int m = 0; m < codeBytes; m++)
            {
                codewords.AsSpan(((m * ProductQuantizer.CodewordsPerSubspace) + codes[(r * codeBytes) + m]) * s, s)
                    .CopyTo(reconstruction.AsSpan((r * d) + (m * s), s));
            }
        }
    }
}
