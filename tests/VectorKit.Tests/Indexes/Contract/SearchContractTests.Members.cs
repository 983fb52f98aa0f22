using VectorKit.Distance;
using VectorKit.Indexes;

namespace VectorKit.Tests.Indexes.Contract;

/// <summary>Count, Contains, GetIds, TryGetVector, MemoryBytes, CodeBytesPerVector and Options.</summary>
public abstract partial class SearchContractTests
{
    [Theory]
    [MemberData(nameof(Metrics))]
    public void Members_DescribeTheItemsHeld(DistanceMetric metric)
    {
        using IVectorIndex empty = Create(Dim, metric);
        AssertOptions(empty);
        Assert.Equal((Dim, metric), (empty.Dimension, empty.Metric));
        Assert.Equal(ExpectedCodeBytes(Dim), empty.CodeBytesPerVector);
        Assert.Equal(0, empty.Count);
        Assert.Empty(empty.GetIds());
        long emptyBytes = empty.MemoryBytes;
        Assert.True(emptyBytes >= 0, $"an empty index reports {emptyBytes} bytes");

        using Filled filled = Fill(metric, 700);
        IVectorIndex index = filled.Index;
        Assert.Equal(700, index.Count);
        if (CountsStoredRows == true)
        {
            Assert.True(index.MemoryBytes >= emptyBytes + (700L * index.CodeBytesPerVector), $"700 items take {index.MemoryBytes} bytes, the empty index {emptyBytes}, codes {index.CodeBytesPerVector} each");
        }
        else if (CountsStoredRows == false)
        {
            Assert.True(index.MemoryBytes - emptyBytes < 700L * index.CodeBytesPerVector, $"700 items mapped take {index.MemoryBytes} bytes of the process, the empty index {emptyBytes}, codes {index.CodeBytesPerVector} each: rows were copied");
        }

        long[] ids = index.GetIds();
        Assert.Equal(filled.Ids.Order(), ids);
        ids[0] = 12345678;
        Assert.Equal(filled.Ids.Order(), index.GetIds());

        var stored = new float[Dim];
        foreach (long id in filled.Ids)
        {
            Assert.True(index.Contains(id));
            Assert.True(index.TryGetVector(id, stored));
            AssertStoredVector(index, filled.VectorOf(id), stored);
        }

        foreach (long absent in new[] { long.MinValue, -15_001L, 1L << 40, long.MaxValue })
        {
            Assert.DoesNotContain(absent, filled.Ids);
            Assert.False(index.Contains(absent));
            var untouched = new float[Dim + 2];
            Array.Fill(untouched, 7f);
            Assert.False(index.TryGetVector(absent, untouched));
            Assert.All(untouched, v => Assert.Equal(7f, v));
        }
    }

    /// <summary>The stored vector: the one added (unit length under cosine), or its decoded code (see <see cref="AssertDecoded"/>).</summary>
    private protected void AssertStoredVector(IVectorIndex index, float[] added, float[] stored)
    {
        double[] expected = Prepared(added, index.Metric);
        if (DecodesStoredVectors)
        {
            AssertDecoded(index, expected, stored);
            return;
        }

        for (int j = 0; j < expected.Length; j++)
        {
            Assert.True(Math.Abs(stored[j] - expected[j]) <= 1e-6, $"component {j}: stored {stored[j]}, added {expected[j]}");
        }

        if (index.Metric == DistanceMetric.Cosine)
        {
            double norm = Math.Sqrt(stored.Sum(v => (double)v * v));
            Assert.True(Math.Abs(norm - 1) <= 1e-6, $"a stored vector under cosine has length {norm}");
        }
    }
}
