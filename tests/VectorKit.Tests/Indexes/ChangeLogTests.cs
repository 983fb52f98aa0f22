using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;

namespace VectorKit.Tests.Indexes;

/// <summary>The compaction's change log against a plain list of the same changes: order, contents, block boundaries.</summary>
public class ChangeLogTests
{
    private const int Dimension = 128;

    [Fact]
    public void TakesEveryChange_InOrder_AcrossBlocks()
    {
        using var log = new ChangeLog();
        var expected = new List<(long[] Ids, float[] Vectors, bool Removal)>();
        var random = new Random(5);
        long pending = 0;

        // Small writes and removals fill several 1 MiB blocks; one batch of 1.5 MiB needs a block of its own.
        for (int i = 0; i < 400; i++)
        {
            int n = i == 200 ? 3_000 : random.Next(1, 40);
            long[] ids = Enumerable.Range(0, n).Select(_ => random.NextInt64()).ToArray();
            bool removal = random.Next(3) == 0;
            float[] vectors = removal ? [] : Enumerable.Range(0, n * Dimension).Select(_ => random.NextSingle()).ToArray();
            if (removal)
            {
                log.RecordRemove(ids);
            }
            else
            {
                log.RecordWrite(ids, vectors);
            }

            expected.Add((ids, vectors, removal));
            pending += n;
            Assert.Equal(pending, log.PendingIds);
        }

        using ChangeLog.Records taken = log.Take();
        Assert.Equal(0, log.PendingIds);
        var seen = new List<(long[] Ids, float[] Vectors, bool Removal)>();
        taken.ForEach(seen, static (seen, ids, vectors, removal) => seen.Add((ids.ToArray(), vectors.ToArray(), removal)));
        Assert.Equal(expected.Count, seen.Count);
        for (int i = 0; i < expected.Count; i++)
        {
            Assert.Equal(expected[i].Removal, seen[i].Removal);
            Assert.Equal(expected[i].Ids, seen[i].Ids);
            Assert.Equal(expected[i].Vectors, seen[i].Vectors);
        }

        using ChangeLog.Records empty = log.Take();
        int calls = 0;
        empty.ForEach(0, (_, _, _, _) => calls++);
        Assert.Equal(0, calls);
    }

    [Fact]
    public void Replay_LeavesTheTargetAsTheWritesLeftTheOriginal()
    {
        using var original = new ExactIndex(4, DistanceMetric.SquaredEuclidean);
        using var target = new ExactIndex(4, DistanceMetric.SquaredEuclidean);
        using var log = new ChangeLog();
        var random = new Random(9);
        for (int i = 0; i < 300; i++)
        {
            long id = random.Next(60);
            if (original.Contains(id) && random.Next(2) == 0)
            {
                original.Remove(id);
                log.RecordRemove([id]);
            }
            else
            {
                float[] vector = [random.NextSingle(), random.NextSingle(), random.NextSingle(), random.NextSingle()];
                original.AddOrReplace(id, vector);
                log.RecordWrite([id], vector);
            }
        }

        ChangeLog.Replay(log.Take(), target);
        Assert.Equal(original.GetIds(), target.GetIds());
        float[] a = new float[4], b = new float[4];
        foreach (long id in original.GetIds())
        {
            Assert.True(original.TryGetVector(id, a));
            Assert.True(target.TryGetVector(id, b));
            Assert.Equal(a, b);
        }
    }

    [Fact]
    public void AppendsAfterDispose_AreIgnored()
    {
        var log = new ChangeLog();
        log.RecordRemove([1, 2]);
        log.Dispose();
        log.RecordWrite([3], new float[Dimension]);
        log.RecordRemove([4]);
        Assert.Equal(0, log.PendingIds);
        using ChangeLog.Records taken = log.Take();
        int calls = 0;
        taken.ForEach(0, (_, _, _, _) => calls++);
        Assert.Equal(0, calls);
    }
}
