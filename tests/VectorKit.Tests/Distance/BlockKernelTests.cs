using VectorKit.Distance.Kernels;
using static VectorKit.Tests.Distance.KernelOracle;

namespace VectorKit.Tests.Distance;

/// <summary>The blocked (queries × rows) kernel, dot product and squared differences, on every kernel path, against the double-precision reference.</summary>
[Trait("Category", "Kernels")]
public class BlockKernelTests
{
    [Theory]
    [MemberData(nameof(Dimensions), MemberType = typeof(KernelOracle))]
    public void EveryPathMatchesTheReference(int n)
    {
        // 6 queries × 7 rows: one full 4 × 4 tile, plus leftover rows and leftover queries.
        Check(n, queryCount: 6, rowCount: 7, seed: n);
    }

    [Fact]
    public void EveryBlockShapeAndLengthSweepMatchTheReference()
    {
        foreach (int n in new[] { 1, 3, 4, 5, 8, 13, 16, 33 })
        {
            for (int queryCount = 1; queryCount <= 9; queryCount++)
            {
                for (int rowCount = 1; rowCount <= 9; rowCount++)
                {
                    Check(n, queryCount, rowCount, seed: (100 * n) + (10 * queryCount) + rowCount);
                }
            }
        }

        for (int n = 1; n <= 260; n++)
        {
            Check(n, queryCount: 5, rowCount: 5, seed: 3000 + n);
        }

        for (int n = 511; n <= 520; n++)
        {
            Check(n, queryCount: 5, rowCount: 5, seed: 3000 + n);
        }
    }

    [Theory]
    [MemberData(nameof(Dimensions), MemberType = typeof(KernelOracle))]
    public void MisalignedBuffersGiveBitIdenticalResults(int n)
    {
        const int queryCount = 5, rowCount = 6;
        float[] queries = Random(queryCount * n, seed: 4 * n);
        float[] rows = Random(rowCount * n, seed: (4 * n) + 1);
        var queryBuffer = new float[queries.Length + 16];
        var rowBuffer = new float[rows.Length + 16];
        foreach ((KernelPath path, bool squared) in Paths().SelectMany(p => new[] { (p, false), (p, true) }))
        {
            float[] expected = Run(path, squared, queries, 0, queryCount, rows, 0, rowCount, n, rowCount);
            for (int offset = 1; offset < 16; offset++)
            {
                Array.Fill(queryBuffer, float.NaN);
                Array.Fill(rowBuffer, float.NaN);
                queries.CopyTo(queryBuffer, offset);
                rows.CopyTo(rowBuffer, 16 - offset);
                float[] actual = Run(path, squared, queryBuffer, offset, queryCount, rowBuffer, 16 - offset, rowCount, n, rowCount);
                for (int i = 0; i < expected.Length; i++)
                {
                    AssertBitIdentical(expected[i], actual[i], $"{path}, n = {n}, output {i}, offsets {offset} and {16 - offset}");
                }
            }
        }
    }

    private static void Check(int n, int queryCount, int rowCount, int seed)
    {
        float[] queries = Random(queryCount * n, seed);
        float[] rows = Random(rowCount * n, seed + 1_000_000);

        // A stride wider than the row count: the padding between output rows must stay untouched.
        int stride = rowCount + 3;
        foreach ((KernelPath path, bool squared) in Paths().SelectMany(p => new[] { (p, false), (p, true) }))
        {
            float[] output = Run(path, squared, queries, 0, queryCount, rows, 0, rowCount, n, stride);
            for (int q = 0; q < queryCount; q++)
            {
                ReadOnlySpan<float> query = queries.AsSpan(q * n, n);
                for (int r = 0; r < rowCount; r++)
                {
                    ReadOnlySpan<float> row = rows.AsSpan(r * n, n);
                    string context = $"{path}, n = {n}, {queryCount} × {rowCount}, query {q}, row {r}";
                    if (squared)
                    {
                        AssertSquaredEuclidean(KernelOracle.SquaredEuclidean(query, row), output[(q * stride) + r], n, "SquaredEuclidean " + context);
                    }
                    else
                    {
                        AssertDot(KernelOracle.Dot(query, row), output[(q * stride) + r], query, row, "Dot " + context);
                    }
                }

                for (int pad = rowCount; pad < stride; pad++)
                {
                    Assert.True(float.IsNaN(output[(q * stride) + pad]), $"{path}, n = {n}, {queryCount} × {rowCount}: padding [{q}, {pad}] was written.");
                }
            }
        }
    }

    private static float[] Run(KernelPath path, bool squared, float[] queries, int queryOffset, int queryCount, float[] rows, int rowOffset, int rowCount, int n, int stride)
    {
        var output = new float[queryCount * stride];
        Array.Fill(output, float.NaN);
        if (squared)
        {
            BlockKernel.Compute<SquaredDifferenceStep>(path, ref queries[queryOffset], queryCount, ref rows[rowOffset], rowCount, n, ref output[0], stride);
        }
        else
        {
            BlockKernel.Compute<DotStep>(path, ref queries[queryOffset], queryCount, ref rows[rowOffset], rowCount, n, ref output[0], stride);
        }

        return output;
    }
}
