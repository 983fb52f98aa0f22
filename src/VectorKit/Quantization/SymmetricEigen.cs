using System.Numerics;

namespace VectorKit.Quantization;

/// <summary>
/// Eigendecomposition of a real symmetric matrix in double precision: Householder reduction to tridiagonal form, then
/// the implicit QL iteration with Wilkinson-style shifts (the EISPACK routines <c>tred2</c> and <c>tql2</c>; Wilkinson
/// &amp; Reinsch, Handbook for Automatic Computation vol. II, 1971, as recalled from memory).
/// </summary>
/// <remarks>
/// Chosen over cyclic Jacobi because it costs about <c>(4/3 + 3)·n³</c> flops once, where Jacobi costs several
/// <c>n³</c> per sweep for 6–10 sweeps; the rotation trainer needs <c>n</c> up to a few thousand.
/// </remarks>
internal static class SymmetricEigen
{
    /// <summary>
    /// Decomposes <c>A = V·diag(λ)·Vᵀ</c>. <paramref name="matrix"/> (n × n, row-major, only its lower triangle is read)
    /// is overwritten with Vᵀ: row j is the unit eigenvector of <paramref name="eigenvalues"/>[j]. Eigenvalues come out
    /// in ascending order.
    /// </summary>
    /// <exception cref="InvalidOperationException">The QL iteration did not converge (not expected for finite input).</exception>
    public static void Decompose(double[] matrix, int n, double[] eigenvalues, CancellationToken cancellationToken = default)
    {
        if (n == 0)
        {
            return;
        }

        var e = new double[n];
        Tridiagonalize(matrix, n, eigenvalues, e, cancellationToken);
        DiagonalizeTridiagonal(matrix, n, eigenvalues, e, cancellationToken);
    }

    // Householder reduction (tred2): on return v holds the accumulated orthogonal transform V, d the diagonal and e the
    // sub-diagonal (e[0] = 0). The textbook walks V down its columns; here V[r][c] is stored at v[c·n + r] (A is
    // symmetric, so the input reads the same), which makes those walks contiguous and leaves Vᵀ, the eigenvectors as
    // rows, for the QL phase.
    private static void Tridiagonalize(double[] v, int n, double[] d, double[] e, CancellationToken cancellationToken)
    {
        for (int j = 0; j < n; j++)
        {
            d[j] = v[(j * n) + (n - 1)];
        }

        for (int i = n - 1; i > 0; i--)
        {
            cancellationToken.ThrowIfCancellationRequested();

            // Scale the row to avoid under/overflow in the Householder vector.
            double scale = 0.0;
            double h = 0.0;
            for (int k = 0; k < i; k++)
            {
                scale += Math.Abs(d[k]);
            }

            if (scale == 0.0)
            {
                e[i] = d[i - 1];
                for (int j = 0; j < i; j++)
                {
                    d[j] = v[(j * n) + (i - 1)];
                    v[(j * n) + i] = 0.0;
                    v[(i * n) + j] = 0.0;
                }
            }
            else
            {
                for (int k = 0; k < i; k++)
                {
                    d[k] /= scale;
                    h += d[k] * d[k];
                }

                double f = d[i - 1];
                double g = Math.Sqrt(h);
                if (f > 0)
                {
                    g = -g;
                }

                e[i] = scale * g;
                h -= f * g;
                d[i - 1] = f - g;
                for (int j = 0; j < i; j++)
                {
                    e[j] = 0.0;
                }

                // Apply the similarity transform to the remaining columns.
                for (int j = 0; j < i; j++)
                {
                    f = d[j];
                    v[(i * n) + j] = f;
                    g = e[j] + (v[(j * n) + j] * f);
                    for (int k = j + 1; k <= i - 1; k++)
                    {
                        g += v[(j * n) + k] * d[k];
                        e[k] += v[(j * n) + k] * f;
                    }

                    e[j] = g;
                }

                f = 0.0;
                for (int j = 0; j < i; j++)
                {
                    e[j] /= h;
                    f += e[j] * d[j];
                }

                double hh = f / (h + h);
                for (int j = 0; j < i; j++)
                {
                    e[j] -= hh * d[j];
                }

                for (int j = 0; j < i; j++)
                {
                    f = d[j];
                    g = e[j];
                    for (int k = j; k <= i - 1; k++)
                    {
                        v[(j * n) + k] -= (f * e[k]) + (g * d[k]);
                    }

                    d[j] = v[(j * n) + (i - 1)];
                    v[(j * n) + i] = 0.0;
                }
            }

            d[i] = h;
        }

        // Accumulate the transformations.
        for (int i = 0; i < n - 1; i++)
        {
            cancellationToken.ThrowIfCancellationRequested();
            v[(i * n) + (n - 1)] = v[(i * n) + i];
            v[(i * n) + i] = 1.0;
            double h = d[i + 1];
            if (h != 0.0)
            {
                for (int k = 0; k <= i; k++)
                {
                    d[k] = v[((i + 1) * n) + k] / h;
                }

                for (int j = 0; j <= i; j++)
                {
                    double g = 0.0;
                    for (int k = 0; k <= i; k++)
                    {
                        g += v[((i + 1) * n) + k] * v[(j * n) + k];
                    }

                    for (int k = 0; k <= i; k++)
                    {
                        v[(j * n) + k] -= g * d[k];
                    }
                }
            }

            for (int k = 0; k <= i; k++)
            {
                v[((i + 1) * n) + k] = 0.0;
            }
        }

        for (int j = 0; j < n; j++)
        {
            d[j] = v[(j * n) + (n - 1)];
            v[(j * n) + (n - 1)] = 0.0;
        }

        v[((n - 1) * n) + (n - 1)] = 1.0;
        e[0] = 0.0;
    }

    // Implicit QL on the tridiagonal (tql2), accumulating rotations into the rows of w = Vᵀ; then sorts ascending.
    private static void DiagonalizeTridiagonal(double[] w, int n, double[] d, double[] e, CancellationToken cancellationToken)
    {
        for (int i = 1; i < n; i++)
        {
            e[i - 1] = e[i];
        }

        e[n - 1] = 0.0;
        double f = 0.0;
        double tst1 = 0.0;
        double eps = Math.Pow(2.0, -52.0);
        for (int l = 0; l < n; l++)
        {
            cancellationToken.ThrowIfCancellationRequested();

            // Find a small sub-diagonal element.
            tst1 = Math.Max(tst1, Math.Abs(d[l]) + Math.Abs(e[l]));
            int m = l;
            while (m < n)
            {
                if (Math.Abs(e[m]) <= eps * tst1)
                {
                    break;
                }

                m++;
            }

            // If m == l, d[l] is an eigenvalue already; otherwise iterate.
            if (m > l)
            {
                int iterations = 0;
                do
                {
                    if (++iterations > 60)
                    {
                        throw new InvalidOperationException($"The symmetric eigensolver did not converge on eigenvalue {l} of {n}.");
                    }

                    // Compute the implicit shift.
                    double g = d[l];
                    double p = (d[l + 1] - g) / (2.0 * e[l]);
                    double r = Hypot(p, 1.0);
                    if (p < 0)
                    {
                        r = -r;
                    }

                    d[l] = e[l] / (p + r);
                    d[l + 1] = e[l] * (p + r);
                    double dl1 = d[l + 1];
                    double h = g - d[l];
                    for (int i = l + 2; i < n; i++)
                    {
                        d[i] -= h;
                    }

                    f += h;

                    // Implicit QL transformation.
                    p = d[m];
                    double c = 1.0;
                    double c2 = c;
                    double c3 = c;
                    double el1 = e[l + 1];
                    double s = 0.0;
                    double s2 = 0.0;
                    for (int i = m - 1; i >= l; i--)
                    {
                        c3 = c2;
                        c2 = c;
                        s2 = s;
                        g = c * e[i];
                        h = c * p;
                        r = Hypot(p, e[i]);
                        e[i + 1] = s * r;
                        s = e[i] / r;
                        c = p / r;
                        p = (c * d[i]) - (s * g);
                        d[i + 1] = h + (s * ((c * g) + (s * d[i])));

                        // Accumulate the rotation into eigenvectors i and i + 1 (rows of w).
                        Rotate(w.AsSpan(i * n, n), w.AsSpan((i + 1) * n, n), c, s);
                    }

                    p = -s * s2 * c3 * el1 * e[l] / dl1;
                    e[l] = s * p;
                    d[l] = c * p;
                }
                while (Math.Abs(e[l]) > eps * tst1);
            }

            d[l] += f;
            e[l] = 0.0;
        }

        // Selection sort ascending, swapping eigenvector columns along.
        for (int i = 0; i < n - 1; i++)
        {
            int k = i;
            double p = d[i];
            for (int j = i + 1; j < n; j++)
            {
                if (d[j] < p)
                {
                    k = j;
                    p = d[j];
                }
            }

            if (k != i)
            {
                d[k] = d[i];
                d[i] = p;
                Span<double> a = w.AsSpan(i * n, n);
                Span<double> b = w.AsSpan(k * n, n);
                for (int j = 0; j < n; j++)
                {
                    (a[j], b[j]) = (b[j], a[j]);
                }
            }
        }
    }

    // lower ← c·lower − s·upper, upper ← s·lower + c·upper, a SIMD lane at a time (each element independently, so
    // the result does not depend on the lane width).
    private static void Rotate(Span<double> lower, Span<double> upper, double c, double s)
    {
        int n = lower.Length;
        int k = 0;
        if (Vector.IsHardwareAccelerated)
        {
            for (; k <= n - Vector<double>.Count; k += Vector<double>.Count)
            {
                var l = new Vector<double>(lower[k..]);
                var u = new Vector<double>(upper[k..]);
                ((s * l) + (c * u)).CopyTo(upper[k..]);
                ((c * l) - (s * u)).CopyTo(lower[k..]);
            }
        }

        for (; k < n; k++)
        {
            double u = upper[k];
            upper[k] = (s * lower[k]) + (c * u);
            lower[k] = (c * lower[k]) - (s * u);
        }
    }

    private static double Hypot(double a, double b)
    {
        double x = Math.Abs(a);
        double y = Math.Abs(b);
        if (x < y)
        {
            (x, y) = (y, x);
        }

        if (x == 0.0)
        {
            return 0.0;
        }

        double t = y / x;
        return x * Math.Sqrt(1.0 + (t * t));
    }
}
