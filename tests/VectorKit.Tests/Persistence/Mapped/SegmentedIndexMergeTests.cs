using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Persistence;
using VectorKit.Tests.Indexes.Contract;
using VectorKit.Tests.TestData;

namespace VectorKit.Tests.Persistence.Mapped;

/// <summary>
/// Background merges of a <see cref="SegmentedIndex"/>: writes and searches during a merge, cancellation, progress,
/// one merge at a time, and an 8-bit base without re-scoring refused.
/// </summary>
public sealed class SegmentedIndexMergeTests : IDisposable
{
    private const int Dim = 4;
    private readonly TempFolder _folder = new();

    public void Dispose() => _folder.Dispose();

    [Fact]
    public async Task WritesAndSearchesDuringAMerge_AllCount_AndTheResultMatchesOneExactIndex()
    {
        (SegmentedIndex segmented, ExactIndex reference) = Start(count: 3000);
        using (segmented)
        using (reference)
        {
            for (int i = 0; i < 500; i++)
            {
                float[] row = SegmentedIndexPropertyTests.Row(50_000 + i);
                segmented.Add(1_000_000 + i, row);
                reference.Add(1_000_000 + i, row);
            }

            Task merge = segmented.MergeAsync(_folder.File("merged.vkx"));

            // Meanwhile: removals from the base and the sealed segment, replacements, new items, and searches.
            for (int i = 0; i < 300; i++)
            {
                long id = i % 3 == 0 ? i * 7 : 1_000_000 + i;
                if (i % 2 == 0)
                {
                    reference.Remove(id);
                    segmented.Remove(id);
                }
                else
                {
                    float[] row = SegmentedIndexPropertyTests.Row(90_000 + i);
                    Assert.Equal(reference.AddOrReplace(id, row), segmented.AddOrReplace(id, row));
                }

                reference.Add(2_000_000 + i, SegmentedIndexPropertyTests.Row(70_000 + i));
                segmented.Add(2_000_000 + i, SegmentedIndexPropertyTests.Row(70_000 + i));
                if (i % 50 == 0)
                {
                    SegmentedIndexPropertyTests.AssertSameSearches(reference, segmented, i);
                }
            }

            await merge;
            Assert.False(segmented.IsMerging);
            Assert.Equal(reference.Count, segmented.Count);
            SegmentedIndexPropertyTests.AssertSameItems(reference, segmented);
            SegmentedIndexPropertyTests.AssertSameSearches(reference, segmented, 1);

            // The merged file holds what was there when the merge began, as one plain exact index file.
            using var merged = IndexFile.Load<ExactIndex>(_folder.File("merged.vkx"));
            Assert.Equal(3500, merged.Count);
        }
    }

    [Fact]
    public async Task ACancelledMerge_ChangesNothing_AndTheNextMergeFoldsEverything()
    {
        (SegmentedIndex segmented, ExactIndex reference) = Start(count: 20_000);
        using (segmented)
        using (reference)
        {
            segmented.Remove(14);
            reference.Remove(14);
            segmented.Add(-5, [1, 2, 3, 4]);
            reference.Add(-5, [1, 2, 3, 4]);
            using var cancel = new CancellationTokenSource();
            var progress = new CancellingProgress(cancel, after: 1);
            Task merge = segmented.MergeAsync(_folder.File("cancelled.vkx"), progress, cancel.Token);
            await Assert.ThrowsAnyAsync<OperationCanceledException>(() => merge);
            Assert.False(File.Exists(_folder.File("cancelled.vkx")));
            Assert.Equal(1, segmented.SegmentCount);
            Assert.Equal(1, segmented.MaskedCount);
            SegmentedIndexPropertyTests.AssertSameItems(reference, segmented);

            var counts = new List<int>();
            await segmented.MergeAsync(_folder.File("second.vkx"), new SynchronousProgress<int>(counts.Add));
            Assert.Equal((0, 0), (segmented.SegmentCount, segmented.MaskedCount));
            Assert.Equal(20_000, counts[^1]);
            Assert.True(counts.SequenceEqual(counts.Order()), "progress counts rise");
            SegmentedIndexPropertyTests.AssertSameItems(reference, segmented);
            SegmentedIndexPropertyTests.AssertSameSearches(reference, segmented, 3);
        }
    }

    [Fact]
    public async Task OneMergeAtATime_AndAnEightBitBaseIsRefused()
    {
        (SegmentedIndex segmented, ExactIndex reference) = Start(count: 5000);
        using (segmented)
        using (reference)
        {
            // The first merge waits in its first progress report until the second has been refused (it used to be
            // raced against the clock, and a quick first merge let the second one start).
            using var reported = new ManualResetEventSlim();
            using var release = new ManualResetEventSlim();
            Task first = segmented.MergeAsync(_folder.File("one.vkx"), new BlockingProgress(reported, release));
            try
            {
                Assert.True(reported.Wait(TimeSpan.FromMinutes(1)), "the first merge reports progress");
                Assert.True(segmented.IsMerging);
                InvalidOperationException e = await Assert.ThrowsAsync<InvalidOperationException>(() => segmented.MergeAsync(_folder.File("two.vkx")));
                Assert.Equal("A merge is already running on this index; wait for it before starting another.", e.Message);
            }
            finally
            {
                release.Set();
            }

            await first;
            Assert.False(File.Exists(_folder.File("two.vkx")));
        }

        using ExactIndex codes = PersistenceSamples.ExactScalar();
        ArgumentException refused = Assert.Throws<ArgumentException>(() => new SegmentedIndex(codes));
        Assert.StartsWith("A segmented index needs a base whose searches return full-precision distances; this ExactIndex stores Scalar8Bit codes without re-scoring", refused.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void DisposingDuringAMerge_WaitsForIt_AndUnmaps()
    {
        (SegmentedIndex segmented, ExactIndex reference) = Start(count: 50_000);
        reference.Dispose();
        Task merge = segmented.MergeAsync(_folder.File("disposed.vkx"));
        segmented.Dispose();
        Assert.True(merge.IsCompleted);
        Assert.Throws<ObjectDisposedException>(() => segmented.Search(new float[Dim], 1));
    }

    [Fact]
    public async Task SearchesOnOtherThreads_DuringWritesSavesAndMerges_AlwaysSeeAWholeState()
    {
        (SegmentedIndex segmented, ExactIndex reference) = Start(count: 5000);
        using (segmented)
        using (reference)
        {
            using var stop = new CancellationTokenSource();
            int searches = 0;
            Task[] readers = Enumerable.Range(0, 2).Select(r => Task.Run(() =>
            {
                float[] query = SegmentedIndexPropertyTests.Row(r);
                while (!stop.IsCancellationRequested)
                {
                    SearchHit[] hits = segmented.Search(query, 10);

                    // Every state holds at least 4,900 items, so a whole state always gives 10 distinct hits, best first.
                    Assert.Equal(10, hits.Length);
                    Assert.Equal(10, hits.Select(h => h.Id).Distinct().Count());
                    Assert.True(hits.SequenceEqual(hits.Order()), "hits are best first, ties by id");
                    Interlocked.Increment(ref searches);
                }
            })).ToArray();

            for (int round = 0; round < 4; round++)
            {
                for (int i = 0; i < 25; i++)
                {
                    long id = (round * 25 + i) * 7L;
                    reference.Remove(id);
                    segmented.Remove(id);
                    float[] row = SegmentedIndexPropertyTests.Row(round * 1000 + i);
                    reference.Add(3_000_000 + (round * 25) + i, row);
                    segmented.Add(3_000_000 + (round * 25) + i, row);
                }

                segmented.Save(_folder.File($"snapshot-{round}.vkx"));
                await segmented.MergeAsync(_folder.File(round % 2 == 0 ? "a.vkx" : "b.vkx"));
            }

            await stop.CancelAsync();
            await Task.WhenAll(readers);
            Assert.True(searches > 0);
            SegmentedIndexPropertyTests.AssertSameItems(reference, segmented);
            SegmentedIndexPropertyTests.AssertSameSearches(reference, segmented, 11);
        }
    }

    // A base of `count` clustered rows (ids 0, 7, 14, ...) saved, opened mapped and wrapped, and the same items in memory.
    private (SegmentedIndex Segmented, ExactIndex Reference) Start(int count)
    {
        string path = _folder.File($"base-{Guid.NewGuid():N}.vkx");
        float[] data = ClusteredData.Generate(count, Dim, 6, 0.5f, seed: 4);
        long[] ids = Enumerable.Range(0, count).Select(i => i * 7L).ToArray();
        var reference = new ExactIndex(Dim, DistanceMetric.SquaredEuclidean);
        reference.AddRange(ids, data);
        IndexFile.Save(reference, path);
        return (SegmentedIndex.Open(path), reference);
    }

    // Signals its first report and holds the reporting (merging) thread there until released.
    private sealed class BlockingProgress(ManualResetEventSlim reported, ManualResetEventSlim release) : IProgress<int>
    {
        public void Report(int value)
        {
            if (!reported.IsSet)
            {
                reported.Set();
                release.Wait();
            }
        }
    }

    private sealed class CancellingProgress(CancellationTokenSource cancel, int after) : IProgress<int>
    {
        private int _reports;

        public void Report(int value)
        {
            if (++_reports >= after)
            {
                cancel.Cancel();
            }
        }
    }
}
