using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.InvertedFile;
using Xunit;

namespace VectorKit.Tests.Indexes.InvertedFile;

/// <summary>
/// A list that must grow is copied into its larger arrays before the write lock, and the copy is used only if no write
/// step ended in between: an add parked between its copy and the lock while another writer changes the list (leaving it
/// as long as the copy) must copy it again, so every item keeps its own vector and is found by it.
/// </summary>
public class InvertedFileConcurrentGrowthTests
{
    [Fact]
    public void AGrowthCopiedBeforeARemoveAndAnAdd_IsCopiedAgain()
    {
        // One list filled exactly by a bulk load: the next add must grow it. While that add is parked after copying the
        // list, another writer removes an entry and adds one, leaving the list as long as the copy but different.
        const int D = 4, N = 100;
        float[] data = [.. Enumerable.Range(0, (N + 2) * D).Select(i => (float)((i * 37) % 101))];
        using var index = new InvertedFileIndex(D, DistanceMetric.SquaredEuclidean, new InvertedFileOptions { ListCount = 1, Encoding = VectorEncoding.Float32 });
        index.Train(data.AsSpan(0, N * D));
        index.AddRange([.. Enumerable.Range(0, N).Select(i => (long)i)], data.AsSpan(0, N * D));
        using var copied = new ManualResetEventSlim();
        using var resume = new ManualResetEventSlim();
        index.AfterListsCopied = () =>
        {
            index.AfterListsCopied = null;
            copied.Set();
            resume.Wait(TimeSpan.FromSeconds(60));
        };

        var parked = new Thread(() => index.Add(N, data.AsSpan(N * D, D))) { IsBackground = true };
        parked.Start();
        Assert.True(copied.Wait(TimeSpan.FromSeconds(60)), "the add never copied the list");
        index.Remove(5);
        index.Add(N + 1, data.AsSpan((N + 1) * D, D));
        resume.Set();
        Assert.True(parked.Join(TimeSpan.FromSeconds(60)));

        var stored = new float[D];
        var hits = new SearchHit[1];
        Assert.Equal(N + 1, index.Count);
        Assert.False(index.Contains(5));
        foreach (long id in Enumerable.Range(0, N + 2).Where(i => i != 5))
        {
            ReadOnlySpan<float> vector = data.AsSpan((int)id * D, D);
            Assert.True(index.TryGetVector(id, stored), $"item {id} was lost");
            Assert.Equal(vector.ToArray(), stored);
            Assert.Equal(1, index.Search(vector, hits));
            Assert.Equal(0f, hits[0].Distance);
        }
    }
}
