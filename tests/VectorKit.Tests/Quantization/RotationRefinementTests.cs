using MathNet.Numerics.LinearAlgebra;
using VectorKit.Quantization;
using Xunit;

namespace VectorKit.Tests.Quantization;

/// <summary>
/// The orthogonal Procrustes step of the refined rotation: its polar factor against MathNet.Numerics 5.0.0's SVD
/// (A = U·S·Vᵀ gives the polar factor U·Vᵀ; Golub &amp; Van Loan §6.4, from memory), and its orthogonality when A is
/// rank-deficient, where the factor is not unique and MathNet's answer is only one of many.
/// </summary>
public class RotationRefinementTests
{
    [Theory]
    [InlineData(1, 1)]
    [InlineData(2, 2)]
    [InlineData(7, 3)]
    [InlineData(40, 4)]
    [InlineData(120, 5)]
    public void PolarFactor_OfAFullRankMatrix_EqualsUVTransposedFromMathNet(int d, int seed)
    {
        double[] a = RandomMatrix(d, seed);
        float[] q = RotationRefinement.PolarFactor(a, d, null, CancellationToken.None);

        Matrix<double> m = Matrix<double>.Build.Dense(d, d, (i, j) => a[(i * d) + j]);
        var svd = m.Svd(computeVectors: true);
        Matrix<double> expected = svd.U * svd.VT;
        for (int i = 0; i < d; i++)
        {
            for (int j = 0; j < d; j++)
            {
                Assert.Equal(expected[i, j], q[(i * d) + j], 1e-4);
            }
        }

        AssertOrthogonal(q, d);
    }

    [Fact]
    public void PolarFactor_OfARankDeficientMatrix_IsOrthogonal_AndMaximisesTheTrace()
    {
        // Rank 5 in 30 dimensions (like pixels that never vary): columns 5.. are copies of combinations of the first 5.
        const int D = 30;
        var random = new Random(8);
        var basis = RandomMatrix(D, 9);
        var a = new double[D * D];
        for (int i = 0; i < D; i++)
        {
            for (int j = 0; j < D; j++)
            {
                for (int r = 0; r < 5; r++)
                {
                    a[(i * D) + j] += basis[(i * D) + r] * basis[(r * D) + j] * (random.NextDouble() + 0.5);
                }
            }
        }

        float[] q = RotationRefinement.PolarFactor(a, D, null, CancellationToken.None);
        AssertOrthogonal(q, D);

        // tr(Qᵀ·A) is the sum of the singular values for every polar factor (the Procrustes optimum).
        Matrix<double> m = Matrix<double>.Build.Dense(D, D, (i, j) => a[(i * D) + j]);
        double singular = m.Svd(computeVectors: false).S.Sum();
        double trace = 0;
        for (int i = 0; i < D; i++)
        {
            for (int j = 0; j < D; j++)
            {
                trace += q[(i * D) + j] * a[(i * D) + j];
            }
        }

        Assert.Equal(singular, trace, 1e-4 * singular);
    }

    [Fact]
    public void PolarFactor_OfZero_KeepsThePreviousRotation()
    {
        const int D = 6;
        float[] previous = RotationRefinement.PolarFactor(RandomMatrix(D, 2), D, null, CancellationToken.None);
        float[] q = RotationRefinement.PolarFactor(new double[D * D], D, previous, CancellationToken.None);
        for (int i = 0; i < D * D; i++)
        {
            Assert.Equal(previous[i], q[i], 1e-5);
        }
    }

    private static void AssertOrthogonal(float[] q, int d)
    {
        for (int i = 0; i < d; i++)
        {
            for (int j = 0; j < d; j++)
            {
                double dot = 0;
                for (int k = 0; k < d; k++)
                {
                    dot += (double)q[(i * d) + k] * q[(j * d) + k];
                }

                Assert.Equal(i == j ? 1.0 : 0.0, dot, 1e-5);
            }
        }
    }

    private static double[] RandomMatrix(int d, int seed)
    {
        var random = new Random(seed);
        var a = new double[d * d];
        for (int i = 0; i < a.Length; i++)
        {
            a[i] = (random.NextDouble() * 2) - 1;
        }

        return a;
    }
}
