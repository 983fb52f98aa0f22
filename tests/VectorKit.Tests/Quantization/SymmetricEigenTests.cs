using System.Diagnostics;
using FsCheck.Xunit;
using MathNet.Numerics.LinearAlgebra;
using VectorKit.Quantization;
using Xunit;
using Xunit.Abstractions;

namespace VectorKit.Tests.Quantization;

/// <summary>
/// The internal symmetric eigensolver against MathNet.Numerics 5.0.0 (<c>Matrix.Evd(Symmetricity.Symmetric)</c>) as
/// the independent reference, plus the defining identities. Tolerances are scaled by the matrix norm ‖A‖ (largest
/// |eigenvalue|): a backward-stable solver gives eigenvalues within a small multiple of n·ε·‖A‖ (Golub &amp; Van Loan,
/// Matrix Computations, §8.1, from memory); 1e-10·‖A‖ leaves wide room at n ≤ 200.
/// </summary>
public class SymmetricEigenTests(ITestOutputHelper output)
{
    [Theory]
    [InlineData(1, 1)]
    [InlineData(2, 2)]
    [InlineData(3, 3)]
    [InlineData(8, 4)]
    [InlineData(33, 5)]
    [InlineData(100, 6)]
    [InlineData(200, 7)]
    public void RandomSymmetric_MatchesMathNet_WithOrthogonalVectors_AndAVEqualsVLambda(int n, int seed)
    {
        double[] a = RandomSymmetric(n, seed);
        Check(a, n);
    }

    [Property(MaxTest = 60)]
    public void AnySmallSymmetricMatrix_SatisfiesTheIdentities(byte size, int seed)
    {
        int n = 1 + (size % 24);
        double[] a = RandomSymmetric(n, seed);
        Check(a, n);
    }

    [Fact]
    public void RepeatedZeroAndDiagonalSpectra_AreHandled()
    {
        // Zero matrix: every eigenvalue 0, vectors still orthonormal.
        Check(new double[25], 5);

        // Identity scaled: one eigenvalue of multiplicity n.
        double[] scaled = new double[36];
        for (int i = 0; i < 6; i++)
        {
            scaled[(i * 6) + i] = 3.5;
        }

        Check(scaled, 6);

        // Rank one (a covariance of a single direction): u·uᵀ has eigenvalues ‖u‖², 0, ..., 0.
        double[] u = [1, -2, 0.5, 3, 0, 1];
        var rankOne = new double[36];
        for (int i = 0; i < 6; i++)
        {
            for (int j = 0; j < 6; j++)
            {
                rankOne[(i * 6) + j] = u[i] * u[j];
            }
        }

        Check(rankOne, 6);

        // A low-rank covariance with many zero-variance directions, like constant image pixels.
        var random = new Random(3);
        const int N = 40;
        var covariance = new double[N * N];
        for (int r = 0; r < 10; r++)
        {
            var x = new double[N];
            for (int j = 0; j < 12; j++)
            {
                x[j] = random.NextDouble();
            }

            for (int i = 0; i < N; i++)
            {
                for (int j = 0; j < N; j++)
                {
                    covariance[(i * N) + j] += x[i] * x[j];
                }
            }
        }

        Check(covariance, N);
    }

    [Fact]
    public void Size784_DecomposesAndReportsItsTime()
    {
        // The Fashion-MNIST dimension: timing is printed for the record, never asserted (shared machine).
        const int N = 784;
        double[] a = RandomSymmetric(N, 11);
        double[] copy = (double[])a.Clone();
        var values = new double[N];
        var watch = Stopwatch.StartNew();
        SymmetricEigen.Decompose(copy, N, values);
        output.WriteLine($"n = {N}: {watch.Elapsed.TotalMilliseconds:F0} ms");
        Matrix<double> v = Matrix<double>.Build.Dense(N, N, (i, j) => copy[(j * N) + i]);
        Matrix<double> m = Matrix<double>.Build.Dense(N, N, (i, j) => a[(i * N) + j]);
        double norm = values.Max(Math.Abs);
        Assert.True((m * v - v * Matrix<double>.Build.DenseOfDiagonalArray(values)).L1Norm() / N <= 1e-9 * norm);
        Assert.True((v.TransposeThisAndMultiply(v) - Matrix<double>.Build.DenseIdentity(N)).L1Norm() / N <= 1e-9);
    }

    [Fact]
    public void Cancellation_StopsTheDecomposition()
    {
        using var cancelled = new CancellationTokenSource();
        cancelled.Cancel();
        Assert.Throws<OperationCanceledException>(() => SymmetricEigen.Decompose(RandomSymmetric(10, 1), 10, new double[10], cancelled.Token));
    }

    private static void Check(double[] a, int n)
    {
        double[] vectors = (double[])a.Clone();
        var values = new double[n];
        SymmetricEigen.Decompose(vectors, n, values);

        Matrix<double> m = Matrix<double>.Build.Dense(n, n, (i, j) => a[(i * n) + j]);
        var reference = m.Evd(Symmetricity.Symmetric).EigenValues.Select(c => c.Real).Order().ToArray();
        double norm = Math.Max(1e-300, reference.Max(Math.Abs));

        // Eigenvalues ascending and equal to MathNet's.
        for (int i = 0; i < n; i++)
        {
            Assert.Equal(reference[i], values[i], 1e-10 * norm);
            if (i > 0)
            {
                Assert.True(values[i - 1] <= values[i]);
            }
        }

        // Rows of the output are the eigenvectors: V orthogonal (VᵀV = I) and A·V = V·Λ, column by column.
        Matrix<double> v = Matrix<double>.Build.Dense(n, n, (i, j) => vectors[(j * n) + i]);
        Matrix<double> gram = v.TransposeThisAndMultiply(v);
        for (int i = 0; i < n; i++)
        {
            for (int j = 0; j < n; j++)
            {
                Assert.Equal(i == j ? 1.0 : 0.0, gram[i, j], 1e-12 * n);
            }
        }

        Matrix<double> residual = (m * v) - (v * Matrix<double>.Build.DenseOfDiagonalArray(values));
        for (int i = 0; i < n; i++)
        {
            for (int j = 0; j < n; j++)
            {
                Assert.True(Math.Abs(residual[i, j]) <= 1e-12 * n * norm, $"(A·V − V·Λ)[{i}, {j}] = {residual[i, j]}, ‖A‖ = {norm}");
            }
        }
    }

    private static double[] RandomSymmetric(int n, int seed)
    {
        var random = new Random(seed);
        var a = new double[n * n];
        for (int i = 0; i < n; i++)
        {
            for (int j = 0; j <= i; j++)
            {
                double value = (random.NextDouble() * 2) - 1;
                a[(i * n) + j] = value;
                a[(j * n) + i] = value;
            }
        }

        return a;
    }
}
