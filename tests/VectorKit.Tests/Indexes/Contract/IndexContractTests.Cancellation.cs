using VectorKit.Distance;
using VectorKit.Indexes;

namespace VectorKit.Tests.Indexes.Contract;

/// <summary>A cancelled AddRange or AddOrReplaceRange leaves the index with all of the batch or none of it.</summary>
public abstract partial class IndexContractTests
{
    private const int Preloaded = 300;
    private const int BatchSize = 1500;

    [Fact]
    public void AddRange_WithACancelledToken_AddsNothing()
    {
        using Filled filled = Fill(DistanceMetric.SquaredEuclidean, Preloaded);
        float[] queries = Queries(3);
        string before = Snapshot(filled.Index, queries);
        using var cancelled = new CancellationTokenSource();
        cancelled.Cancel();
        (long[] ids, float[] rows) = Batch();
        Assert.ThrowsAny<OperationCanceledException>(() => AddRange(filled.Index, ids, rows, null, cancelled.Token));
        Assert.Equal(before, Snapshot(filled.Index, queries));
        Assert.ThrowsAny<OperationCanceledException>(() => AddOrReplaceRange(filled.Index, ids, rows, null, cancelled.Token));
        Assert.Equal(before, Snapshot(filled.Index, queries));
    }

    [Fact]
    public void AddRange_CancelledFromItsFirstProgressReport_IsAllOrNothing()
    {
        using Filled filled = Fill(DistanceMetric.SquaredEuclidean, Preloaded);
        (long[] ids, float[] rows) = Batch();
        using var cancel = new CancellationTokenSource();
        var progress = new SynchronousProgress<int>(_ => cancel.Cancel());
        bool completed = TryWrite(() => AddRange(filled.Index, ids, rows, progress, cancel.Token));
        AssertAllOrNothing(filled, ids, completed);
        if (!completed)
        {
            AddRange(filled.Index, ids, rows);
            AssertAllOrNothing(filled, ids, completed: true);
        }
    }

    [Fact]
    public void AddRange_CancelledAfterAShortDelay_IsAllOrNothing()
    {
        var random = new Random(5);
        for (int attempt = 0; attempt < 6; attempt++)
        {
            using Filled filled = Fill(DistanceMetric.SquaredEuclidean, Preloaded);
            (long[] ids, float[] rows) = Batch();
            using var cancel = new CancellationTokenSource(TimeSpan.FromMilliseconds(random.Next(0, 25)));
            bool completed = TryWrite(() => AddRange(filled.Index, ids, rows, null, cancel.Token));
            AssertAllOrNothing(filled, ids, completed);
            if (!completed)
            {
                AddRange(filled.Index, ids, rows);
                AssertAllOrNothing(filled, ids, completed: true);
            }
        }
    }

    [Fact]
    public void AddOrReplaceRange_Cancelled_IsAllOrNothing()
    {
        var random = new Random(6);
        for (int attempt = 0; attempt < 6; attempt++)
        {
            using Filled filled = Fill(DistanceMetric.SquaredEuclidean, Preloaded);
            float[] queries = Queries(3);
            float[] compared = CancelledWriteRestoresLinks ? queries : [];
            string before = Snapshot(filled.Index, compared);

            // Every preloaded id gets a new vector, and a batch of new ids comes with them.
            (long[] newIds, float[] newRows) = Batch();
            long[] ids = [.. filled.Ids, .. newIds];
            float[] rows = [.. ContractData.Rows(Preloaded, Dim, 19), .. newRows];
            using var cancel = new CancellationTokenSource();
            IProgress<int>? progress = null;
            if (attempt == 0)
            {
                progress = new SynchronousProgress<int>(_ => cancel.Cancel());
            }
            else
            {
                cancel.CancelAfter(random.Next(0, 25));
            }

            int replaced = -1;
            bool completed = TryWrite(() => replaced = AddOrReplaceRange(filled.Index, ids, rows, progress, cancel.Token));
            if (!completed)
            {
                Assert.Equal(before, Snapshot(filled.Index, compared));
                Assert.Equal(Preloaded, AddOrReplaceRange(filled.Index, ids, rows));
            }
            else
            {
                Assert.Equal(Preloaded, replaced);
            }

            Assert.Equal(ids.Order(), filled.Index.GetIds());
            var stored = new float[Dim];
            for (int r = 0; r < ids.Length; r += 11)
            {
                Assert.True(filled.Index.TryGetVector(ids[r], stored));
                AssertStoredVector(filled.Index, Row(rows, r), stored);
            }
        }
    }

    private static (long[] Ids, float[] Rows) Batch() => (ContractData.Ids(BatchSize, offset: 1), ContractData.Rows(BatchSize, Dim, 17));

    // Runs a write that may be cancelled: true when it completed, false when it threw OperationCanceledException.
    private static bool TryWrite(Action write)
    {
        try
        {
            write();
            return true;
        }
        catch (OperationCanceledException)
        {
            return false;
        }
    }

    private void AssertAllOrNothing(Filled filled, long[] batch, bool completed)
    {
        IVectorIndex index = filled.Index;
        long[] expected = completed ? [.. filled.Ids, .. batch] : filled.Ids;
        Assert.Equal(expected.Order(), index.GetIds());
        Assert.Equal(expected.Length, index.Count);
        int present = batch.Count(index.Contains);
        Assert.True(present == (completed ? batch.Length : 0), $"{present} of the batch's {batch.Length} ids are present after a {(completed ? "completed" : "cancelled")} batch");

        // Nothing of a cancelled batch is found by a search either.
        HashSet<long> mine = [.. batch];
        float[] queries = Queries(20, seed: 23);
        BatchSearchResults results = index.SearchBatch(queries, K, WideSearch);
        for (int q = 0; q < 20; q++)
        {
            SearchHit[] hits = results[q].ToArray();
            Assert.Equal(K, hits.Length);
            if (!completed)
            {
                Assert.DoesNotContain(hits, h => mine.Contains(h.Id));
            }
        }
    }
}
