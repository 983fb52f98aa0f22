using FsCheck;
using FsCheck.Xunit;
using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Persistence;

namespace VectorKit.Tests.Persistence.Mapped;

/// <summary>
/// Any sequence of adds, replacements, removals, saves and merges on a <see cref="SegmentedIndex"/> over a mapped file
/// leaves it answering exactly as one in-memory <see cref="ExactIndex"/> given the same writes: the same ids, vectors
/// and search results (ids and distances, bit for bit, ties by id). Vectors have small integer components, so ties are
/// common.
/// </summary>
public sealed class SegmentedIndexPropertyTests : IDisposable
{
    private const int Dim = 4;
    private readonly TempFolder _folder = new();

    public void Dispose() => _folder.Dispose();

    [Property(MaxTest = 60)]
    public void AnySequenceOfWritesSavesAndMerges_MatchesOneInMemoryExactIndex(NonNegativeInt metricPick, int[] script)
    {
        var metric = (DistanceMetric)(metricPick.Get % 3);
        string basePath = _folder.File($"base-{Guid.NewGuid():N}.vkx");
        string other = _folder.File($"other-{Guid.NewGuid():N}.vkx");
        using var reference = new ExactIndex(Dim, metric);
        using (var initial = new ExactIndex(Dim, metric))
        {
            for (int i = 0; i < 10; i++)
            {
                float[] row = Row(i * 977);
                initial.Add(100 + i, row);
                reference.Add(100 + i, row);
            }

            IndexFile.Save(initial, basePath);
        }

        using SegmentedIndex segmented = SegmentedIndex.Open(basePath);
        int merges = 0;
        foreach (int step in script ?? [])
        {
            long id = 100 + ((step >> 8) & 31);
            float[] row = Row(step);
            switch ((step & 0xFF) % 10)
            {
                case 0 or 1 or 2 or 3:
                    if (reference.Contains(id))
                    {
                        Assert.Throws<ArgumentException>(() => segmented.Add(id, row));
                    }
                    else
                    {
                        reference.Add(id, row);
                        segmented.Add(id, row);
                    }

                    break;
                case 4 or 5:
                    Assert.Equal(reference.AddOrReplace(id, row), segmented.AddOrReplace(id, row));
                    break;
                case 6 or 7:
                    if (reference.Contains(id))
                    {
                        reference.Remove(id);
                        segmented.Remove(id);
                    }
                    else
                    {
                        Assert.Throws<KeyNotFoundException>(() => segmented.Remove(id));
                    }

                    break;
                case 8:
                    string saved = _folder.File($"saved-{Guid.NewGuid():N}.vkx");
                    segmented.Save(saved);
                    using (var loaded = IndexFile.Load<ExactIndex>(saved, IndexLoadOptions.Untrusted))
                    {
                        AssertSameItems(reference, loaded);
                    }

                    File.Delete(saved);
                    break;
                default:
                    // Alternately onto the file the base is mapped from and onto another one.
                    segmented.MergeAsync(merges++ % 2 == 0 ? basePath : other).GetAwaiter().GetResult();
                    Assert.Equal(0, segmented.SegmentCount);
                    break;
            }

            Assert.Equal(reference.Count, segmented.Count);
            AssertSameSearches(reference, segmented, step);
        }

        AssertSameItems(reference, segmented);
    }

    // Components in {-2, ..., 2}, the first never 0 (cosine needs a direction).
    internal static float[] Row(int seed)
    {
        var random = new Random(seed);
        var row = new float[Dim];
        for (int i = 0; i < Dim; i++)
        {
            row[i] = random.Next(-2, 3);
        }

        row[0] = random.Next(2) == 0 ? -1 : 1;
        return row;
    }

    internal static void AssertSameSearches(ExactIndex reference, IVectorIndex actual, int seed)
    {
        foreach (int q in new[] { seed, seed ^ 0x5A5A, 7 })
        {
            float[] query = Row(q);
            foreach (int k in new[] { 1, 4, 40 })
            {
                Assert.Equal(reference.Search(query, k), actual.Search(query, k));
            }

            var odd = new SearchOptions { Filter = id => id % 2 == 1 };
            Assert.Equal(reference.Search(query, 5, odd), actual.Search(query, 5, odd));
        }
    }

    internal static void AssertSameItems(ExactIndex reference, IVectorIndex actual)
    {
        Assert.Equal(reference.GetIds(), actual.GetIds());
        var expected = new float[Dim];
        var got = new float[Dim];
        foreach (long id in reference.GetIds())
        {
            Assert.True(reference.TryGetVector(id, expected));
            Assert.True(actual.TryGetVector(id, got));
            Assert.Equal(expected, got);
        }
    }
}
