using VectorKit.Distance;
using VectorKit.Indexes.InvertedFile;
using VectorKit.Tests.TestData;
using Xunit;

namespace VectorKit.Tests.Indexes.InvertedFile;

/// <summary>
/// A single add's exclusive step allocates nothing that grows with the number of lists: an allocation there can start a
/// collection while every search waits for the lock, and a steady stream of single adds would start them often.
/// </summary>
public class InvertedFileWriteAllocationTests
{
    [Fact]
    public void ASingleAdd_AllocatesLessThanAnArrayOverTheLists()
    {
        const int Lists = 2_048, D = 8, N = 8_192, Adds = 16;
        float[] data = ClusteredData.Generate(N, D, 64, 0.3f, seed: 21);
        using var index = new InvertedFileIndex(D, DistanceMetric.SquaredEuclidean, new InvertedFileOptions { ListCount = Lists });
        index.Train(data);
        index.AddRange(Enumerable.Range(0, N).Select(i => (long)i).ToArray(), data);

        // The first add grows the rows and the id map, and fills the pools this thread rents from.
        index.Add(N, data.AsSpan(0, D));
        long before = GC.GetAllocatedBytesForCurrentThread();
        for (int i = 1; i <= Adds; i++)
        {
            index.Add(N + i, data.AsSpan(i * D, D));
        }

        long perAdd = (GC.GetAllocatedBytesForCurrentThread() - before) / Adds;
        Assert.True(perAdd < Lists * sizeof(int) / 2, $"a single add allocated {perAdd:N0} B on average with {Lists:N0} lists");
        Assert.Equal(N + Adds + 1, index.Count);
    }
}
