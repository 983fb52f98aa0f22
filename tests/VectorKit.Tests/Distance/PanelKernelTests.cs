using VectorKit.Distance.Kernels;
using static VectorKit.Tests.Distance.KernelOracle;

namespace VectorKit.Tests.Distance;

/// <summary>The packed-panel dot-product kernel (the exact index's batch distances), on every kernel path, against the double-precision reference.</summary>
[Trait("Category", "Kernels")]
public class PanelKernelTests
{
    [Theory]
    [MemberData(nameof(Dimensions), MemberType = typeof(KernelOracle))]
    public void EveryPathMatchesTheReference(int n)
    {
        // 53 queries: one or more full panels on every width plus a partial one; 17 rows: two full row groups and one row on every path.
        Check(n, queryCount: 53, rowCount: 17, seed: n);
    }

    [Fact]
    public void EveryBlockShapeAndComponentBlockEdgeMatchesTheReference()
    {
        foreach (int n in new[] { 1, 5, 16, 33 })
        {
            for (int queryCount = 1; queryCount <= 52; queryCount += 3)
            {
                for (int rowCount = 1; rowCount <= 17; rowCount++)
                {
                    Check(n, queryCount, rowCount, seed: (1000 * n) + (20 * queryCount) + rowCount);
                }
            }
        }

        // Around one, two and three component blocks.
        foreach (int n in new[] { PanelKernel.ComponentBlock - 1, PanelKernel.ComponentBlock, PanelKernel.ComponentBlock + 1, (2 * PanelKernel.ComponentBlock) + 1, (3 * PanelKernel.ComponentBlock) - 1 })
        {
            Check(n, queryCount: 9, rowCount: 7, seed: 5000 + n);
        }
    }

    [Fact]
    public void SumOrderDoesNotDependOnWhereTheRowsStart()
    {
        const int n = 300, queryCount = 5, rowCount = 8;
        float[] queries = Random(queryCount * n, seed: 11);
        float[] rows = Random(rowCount * n, seed: 12);
        var rowBuffer = new float[rows.Length + 16];
        foreach (KernelPath path in Paths())
        {
            float[] expected = Run(path, queries, queryCount, rows, 0, rowCount, n, out int stride);
            for (int offset = 1; offset < 16; offset++)
            {
                Array.Fill(rowBuffer, float.NaN);
                rows.CopyTo(rowBuffer, offset);
                float[] actual = Run(path, queries, queryCount, rowBuffer, offset, rowCount, n, out _);
                for (int r = 0; r < rowCount; r++)
                {
                    for (int q = 0; q < queryCount; q++)
                    {
                        AssertBitIdentical(expected[(r * stride) + q], actual[(r * stride) + q], $"{path}, row {r}, query {q}, offset {offset}");
                    }
                }
            }
        }
    }

    private static void Check(int n, int queryCount, int rowCount, int seed)
    {
        float[] queries = Random(queryCount * n, seed);
        float[] rows = Random(rowCount * n, seed + 1_000_000);
        foreach (KernelPath path in Paths())
        {
            float[] output = Run(path, queries, queryCount, rows, 0, rowCount, n, out int stride);
            for (int r = 0; r < rowCount; r++)
            {
                ReadOnlySpan<float> row = rows.AsSpan(r * n, n);
                for (int q = 0; q < queryCount; q++)
                {
                    ReadOnlySpan<float> query = queries.AsSpan(q * n, n);
                    AssertDot(KernelOracle.Dot(query, row), output[(r * stride) + q], query, row, $"{path}, n = {n}, {queryCount} × {rowCount}, query {q}, row {r}");
                }

                // Padding columns hold zero queries.
                for (int q = queryCount; q < stride; q++)
                {
                    Assert.Equal(0f, output[(r * stride) + q]);
                }
            }
        }
    }

    private static float[] Run(KernelPath path, float[] queries, int queryCount, float[] rows, int rowOffset, int rowCount, int n, out int stride)
    {
        stride = PanelKernel.PaddedQueries(path, queryCount);
        var packed = new float[PanelKernel.PackedLength(path, queryCount, n)];
        Array.Fill(packed, float.NaN);
        PanelKernel.Pack(path, queries, queryCount, n, packed);
        var output = new float[PanelKernel.PaddedRows(path, rowCount) * stride];
        Array.Fill(output, float.NaN);
        PanelKernel.Compute(path, ref packed[0], queryCount, ref rows[rowOffset], rowCount, n, ref output[0], stride);
        return output;
    }
}
