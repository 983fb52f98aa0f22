using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Indexes.Graph;
using VectorKit.Indexes.InvertedFile;

namespace VectorKit.Tests.Indexes;

public class IndexIdsTests
{
    public static TheoryData<string> Kinds => new() { "exact", "graph", "inverted-file" };

    [Theory]
    [MemberData(nameof(Kinds))]
    public void GetIds_ListsTheLiveIdsInAscendingOrder(string kind)
    {
        using IVectorIndex index = Create(kind);
        Assert.Empty(index.GetIds());
        long[] ids = [50, -3, 7, 1_000_000_000_000, 12, 0];
        index.AddRange(ids, Enumerable.Range(0, ids.Length * 2).Select(i => (float)i).ToArray());
        index.Remove(7);
        index.Add(8, [1f, 2f]);
        Assert.Equal([-3L, 0, 8, 12, 50, 1_000_000_000_000], index.GetIds());
        index.Dispose();
        Assert.Throws<ObjectDisposedException>(() => index.GetIds());
    }

    private static IVectorIndex Create(string kind)
    {
        switch (kind)
        {
            case "exact":
                return new ExactIndex(2, DistanceMetric.SquaredEuclidean);
            case "graph":
                return new GraphIndex(2, DistanceMetric.SquaredEuclidean);
            default:
                var inverted = new InvertedFileIndex(2, DistanceMetric.SquaredEuclidean, new InvertedFileOptions { ListCount = 2 });
                inverted.Train([0f, 0, 1, 1, 5, 5, 6, 6]);
                return inverted;
        }
    }
}
