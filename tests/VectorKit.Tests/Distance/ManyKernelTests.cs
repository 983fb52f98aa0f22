using VectorKit.Distance.Kernels;
using static VectorKit.Tests.Distance.KernelOracle;

namespace VectorKit.Tests.Distance;

/// <summary>
/// The one-against-many kernel on every kernel path: each row against the double-precision reference, and
/// <see cref="ManyKernel.One{TStep}"/> bit-identical to <see cref="ManyKernel.Compute{TStep}"/> for every row.
/// </summary>
[Trait("Category", "Kernels")]
public class ManyKernelTests
{
    // 11 rows: two groups of four and three rows left over, so both code shapes run.
    private const int Rows = 11;

    [Theory]
    [MemberData(nameof(Dimensions), MemberType = typeof(KernelOracle))]
    public void EveryPathMatchesTheReferenceAndOneMatchesCompute(int n) => CheckAllPaths(n, Rows, seed: n);

    [Fact]
    public void LengthSweepMatchesTheReferenceAndOneMatchesCompute()
    {
        for (int n = 1; n <= 260; n++)
        {
            CheckAllPaths(n, rowCount: 5, seed: 2000 + n);
        }

        for (int n = 511; n <= 520; n++)
        {
            CheckAllPaths(n, rowCount: 5, seed: 2000 + n);
        }
    }

    [Theory]
    [InlineData(0)]
    [InlineData(1)]
    [InlineData(3)]
    [InlineData(4)]
    [InlineData(9)]
    public void EveryRowCountIsCoveredAndNothingPastTheEndIsWritten(int rowCount)
    {
        const int n = 37;
        float[] query = Random(n, seed: 1);
        float[] rows = Random(rowCount * n, seed: 2);
        foreach (KernelPath path in Paths())
        {
            var results = new float[rowCount + 1];
            results[rowCount] = 12345f;
            ManyKernel.Compute<DotStep>(path, ref query[0], ref RefOrNull(rows), n, rowCount, ref RefOrNull(results));
            Assert.Equal(12345f, results[rowCount]);
            for (int r = 0; r < rowCount; r++)
            {
                AssertBitIdentical(ManyKernel.One<DotStep>(path, ref query[0], ref rows[r * n], n), results[r], $"{path}, row {r} of {rowCount}");
            }
        }
    }

    [Theory]
    [MemberData(nameof(Dimensions), MemberType = typeof(KernelOracle))]
    public void MisalignedBuffersGiveBitIdenticalResults(int n)
    {
        float[] query = Random(n, seed: 3 * n);
        float[] rows = Random(Rows * n, seed: (3 * n) + 1);
        var queryBuffer = new float[n + 16];
        var rowBuffer = new float[(Rows * n) + 16];
        foreach (KernelPath path in Paths())
        {
            float[] dots = Compute<DotStep>(path, query, 0, rows, 0, n, rows.Length / n);
            float[] squares = Compute<SquaredDifferenceStep>(path, query, 0, rows, 0, n, rows.Length / n);
            for (int offset = 1; offset < 16; offset++)
            {
                Array.Fill(queryBuffer, float.NaN);
                Array.Fill(rowBuffer, float.NaN);
                query.CopyTo(queryBuffer, offset);
                rows.CopyTo(rowBuffer, 16 - offset);
                float[] movedDots = Compute<DotStep>(path, queryBuffer, offset, rowBuffer, 16 - offset, n, Rows);
                float[] movedSquares = Compute<SquaredDifferenceStep>(path, queryBuffer, offset, rowBuffer, 16 - offset, n, Rows);
                for (int r = 0; r < Rows; r++)
                {
                    string context = $"{path}, n = {n}, row {r}, offsets {offset} and {16 - offset}";
                    AssertBitIdentical(dots[r], movedDots[r], $"Dot {context}");
                    AssertBitIdentical(squares[r], movedSquares[r], $"SquaredEuclidean {context}");
                }
            }
        }
    }

    // The runtime recompiles hot methods (tiered compilation) after about 30 calls and a short delay; One and
    // Compute must agree before, during and after that, or single and batch search could rank rows differently.
    [Fact]
    public void OneStaysBitIdenticalToComputeAcrossRecompilation()
    {
        const int n = 19, rowCount = 6;
        float[] query = Random(n, seed: 11);
        float[] rows = Random(rowCount * n, seed: 12);
        foreach (KernelPath path in Paths())
        {
            float[] dots = Compute<DotStep>(path, query, 0, rows, 0, n, rowCount);
            float[] squares = Compute<SquaredDifferenceStep>(path, query, 0, rows, 0, n, rowCount);
            for (int call = 0; call < 300; call++)
            {
                int r = call % rowCount;
                AssertBitIdentical(dots[r], ManyKernel.One<DotStep>(path, ref query[0], ref rows[r * n], n), $"Dot {path}, call {call}");
                AssertBitIdentical(squares[r], ManyKernel.One<SquaredDifferenceStep>(path, ref query[0], ref rows[r * n], n), $"SquaredEuclidean {path}, call {call}");
                if (call % 30 == 0)
                {
                    Thread.Sleep(50);
                }
            }
        }
    }

    private static void CheckAllPaths(int n, int rowCount, int seed)
    {
        float[] query = Random(n, seed);
        float[] rows = Random(rowCount * n, seed + 1_000_000);
        foreach (KernelPath path in Paths())
        {
            float[] dots = Compute<DotStep>(path, query, 0, rows, 0, n, rows.Length / n);
            float[] squares = Compute<SquaredDifferenceStep>(path, query, 0, rows, 0, n, rows.Length / n);
            for (int r = 0; r < rowCount; r++)
            {
                ReadOnlySpan<float> row = rows.AsSpan(r * n, n);
                string context = $"{path}, n = {n}, row {r}";
                AssertDot(KernelOracle.Dot(query, row), dots[r], query, row, $"Dot {context}");
                AssertSquaredEuclidean(KernelOracle.SquaredEuclidean(query, row), squares[r], n, $"SquaredEuclidean {context}");
                AssertBitIdentical(dots[r], ManyKernel.One<DotStep>(path, ref query[0], ref rows[r * n], n), $"Dot One vs Compute {context}");
                AssertBitIdentical(squares[r], ManyKernel.One<SquaredDifferenceStep>(path, ref query[0], ref rows[r * n], n), $"SquaredEuclidean One vs Compute {context}");
            }
        }
    }

    private static float[] Compute<TStep>(KernelPath path, float[] query, int queryOffset, float[] rows, int rowOffset, int n, int rowCount)
        where TStep : struct, IAccumulateStep
    {
        var results = new float[rowCount];
        ManyKernel.Compute<TStep>(path, ref query[queryOffset], ref rows[rowOffset], n, rowCount, ref results[0]);
        return results;
    }

    private static ref float RefOrNull(float[] values) => ref System.Runtime.InteropServices.MemoryMarshal.GetArrayDataReference(values);
}
