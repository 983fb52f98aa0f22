using VectorKit.Distance;
using VectorKit.Indexes;

namespace VectorKit.Tests.Indexes.Contract;

/// <summary>AddOrReplace and AddOrReplaceRange: what search and TryGetVector see afterwards, and during.</summary>
public abstract partial class IndexContractTests
{
    [Theory]
    [MemberData(nameof(Metrics))]
    public void AddOrReplace_TheNewVectorIsWhatSearchesAndReadsSee(DistanceMetric metric)
    {
        using Filled filled = Fill(metric, 500);
        IVectorIndex index = filled.Index;

        // Rows of another seed from the same distribution (inside the trained code ranges), away from the old ones.
        float[] fresh = ContractData.Rows(5, Dim, 31);
        var stored = new float[Dim];
        for (int r = 0; r < 5; r++)
        {
            long id = filled.Ids[(r * 97) + 3];
            float[] old = filled.VectorOf(id);
            float[] replacement = Row(fresh, r);
            Assert.True(AddOrReplace(index, id, replacement));
            Assert.Equal(500, index.Count);
            filled.Reference.Remove(id);
            filled.Reference.Add(id, replacement);
            Assert.True(index.TryGetVector(id, stored));
            AssertStoredVector(index, replacement, stored);
            AssertFoundAt(index, filled, id, replacement);
            AssertNotAt(index, id, old, replacement);
        }

        long newId = 9_999_999;
        float[] added = Row(fresh, 0).Select(v => v * 0.5f).ToArray();
        Assert.False(AddOrReplace(index, newId, added));
        Assert.Equal(501, index.Count);
        Assert.True(index.Contains(newId));
        Assert.True(index.TryGetVector(newId, stored));
        AssertStoredVector(index, added, stored);
    }

    [Theory]
    [MemberData(nameof(Metrics))]
    public void AddOrReplaceRange_ReplacesAndAddsInOneBatch(DistanceMetric metric)
    {
        using Filled filled = Fill(metric, 400);
        IVectorIndex index = filled.Index;
        long[] replaced = [filled.Ids[1], filled.Ids[50], filled.Ids[120], filled.Ids[399], filled.Ids[200]];
        long[] added = [7_000_001, -7_000_002, 7_000_003];
        long[] ids = [replaced[0], added[0], replaced[1], replaced[2], added[1], replaced[3], added[2], replaced[4]];
        float[] vectors = ContractData.Rows(ids.Length, Dim, 41);
        var old = replaced.ToDictionary(id => id, filled.VectorOf);

        Assert.Equal(replaced.Length, AddOrReplaceRange(index, ids, vectors));
        Assert.Equal(400 + added.Length, index.Count);
        Assert.Equal(filled.Ids.Concat(added).Order(), index.GetIds());
        var stored = new float[Dim];
        for (int r = 0; r < ids.Length; r++)
        {
            filled.Reference.Remove(ids[r]);
            filled.Reference.Add(ids[r], Row(vectors, r));
        }

        for (int r = 0; r < ids.Length; r++)
        {
            Assert.True(index.TryGetVector(ids[r], stored));
            AssertStoredVector(index, Row(vectors, r), stored);
            AssertFoundAt(index, filled, ids[r], Row(vectors, r));
            if (old.TryGetValue(ids[r], out float[]? was))
            {
                AssertNotAt(index, ids[r], was, Row(vectors, r));
            }
        }

        Assert.Equal(0, AddOrReplaceRange(index, [], []));
        Assert.Equal(403, index.Count);
    }

    /// <summary>
    /// Several threads search for an item's old and new vectors with a filter that passes only that item, while
    /// another replaces its vector back and forth: a search must see the item (with one vector or the other), never
    /// no item and never two copies of it.
    /// </summary>
    [Fact]
    public void AddOrReplace_ConcurrentSearchesAlwaysSeeTheItemOnce()
    {
        using Filled filled = Fill(DistanceMetric.SquaredEuclidean, 400);
        IVectorIndex index = filled.Index;
        long target = filled.Ids[17];
        float[] first = filled.VectorOf(target);
        float[] second = filled.VectorOf(filled.Ids[300]);
        var options = new SearchOptions { Filter = id => id == target, SearchWidth = WideSearch.SearchWidth };
        using var done = new CancellationTokenSource();
        var failures = new System.Collections.Concurrent.ConcurrentQueue<string>();
        long searches = 0;

        // Searchers on threads of their own (the pool may be busy with other tests), all running before the first write.
        using var started = new CountdownEvent(3);
        Thread[] searchers = Enumerable.Range(0, 3).Select(t => new Thread(() =>
        {
            var destination = new SearchHit[5];
            bool announced = false;
            float[] query = t % 2 == 0 ? first : second;
            while (!done.IsCancellationRequested && failures.IsEmpty)
            {
                int found = index.Search(query, destination, options);
                if (!announced)
                {
                    announced = true;
                    started.Signal();
                }
                else
                {
                    Interlocked.Increment(ref searches);
                }

                if (found != 1 || destination[0].Id != target)
                {
                    failures.Enqueue($"a search returned {found} hits: {string.Join(", ", destination.Take(found).Select(h => h.Id))}");
                }
            }
        }) { IsBackground = true }).ToArray();
        foreach (Thread searcher in searchers)
        {
            searcher.Start();
        }

        Assert.True(started.Wait(TimeSpan.FromSeconds(30)) || !failures.IsEmpty, "the searchers did not start");
        Interlocked.Exchange(ref searches, 0);
        try
        {
            // At least 300 replacements, and on until the searchers have run a few thousand times between them
            // (bounded in time, for a slow machine).
            var clock = System.Diagnostics.Stopwatch.StartNew();
            for (int i = 0; failures.IsEmpty && (i < 300 || (Interlocked.Read(ref searches) < 3000 && clock.Elapsed < TimeSpan.FromSeconds(10))); i++)
            {
                Assert.True(AddOrReplace(index, target, i % 2 == 0 ? second : first));
            }
        }
        finally
        {
            done.Cancel();
            foreach (Thread searcher in searchers)
            {
                searcher.Join();
            }
        }

        Assert.True(failures.IsEmpty, failures.FirstOrDefault());
        Assert.True(Interlocked.Read(ref searches) >= 100, $"only {searches} searches ran during the replacements");
        Assert.Equal(400, index.Count);
    }

    // Searching for the item's vector finds it where the reference ranks it (first, at ~0, under the metrics whose
    // self-distance is the least possible), with its new distance.
    private void AssertFoundAt(IVectorIndex index, Filled filled, long id, float[] vector)
    {
        SearchHit[] hits = index.Search(vector, K, WideSearch);
        AssertBestFirst(hits);
        List<(long Id, double Distance)> truth = filled.Reference.Ranked(vector).Take(K).ToList();
        int rank = truth.FindIndex(t => t.Id == id);
        if (rank < 0)
        {
            return; // inner product: other items can outrank an item at its own vector
        }

        int at = Array.FindIndex(hits, h => h.Id == id);
        Assert.True(at >= 0, $"searching for id {id}'s new vector does not find it (reference rank {rank})");

        // Exact distances: first, at ~0. Codes only: at the distance to its decoded new code (a vector outside the
        // trained ranges is clamped, so it need not be first); AssertDistances measures that against its stored vector.
        AssertDistances(index, vector, hits.AsSpan(at, 1), new Filled(index, [id], vector, filled.Reference, filled.Metric));
        if (index.Metric != DistanceMetric.InnerProduct && ReportsExactDistances)
        {
            Assert.Equal(0, at);
            Assert.True(Math.Abs(hits[0].Distance) <= 1e-5, $"id {id} at its own new vector has distance {hits[0].Distance}");
        }
    }

    // At the old vector the item no longer has its old, near-zero distance: if it is returned at all, it is with the
    // distance of its new vector.
    private void AssertNotAt(IVectorIndex index, long id, float[] old, float[] replacement)
    {
        double[] q = Prepared(old, index.Metric);
        double newDistance = NaiveIndex.Distance(index.Metric, q, Prepared(replacement, index.Metric));
        double oldDistance = NaiveIndex.Distance(index.Metric, q, Prepared(old, index.Metric));
        foreach (SearchHit hit in index.Search(old, K, WideSearch))
        {
            if (hit.Id == id)
            {
                Assert.True(
                    Math.Abs(hit.Distance - newDistance) < Math.Abs(hit.Distance - oldDistance),
                    $"at its old vector id {id} is found at {hit.Distance}: nearer its old distance {oldDistance} than its new one {newDistance}");
            }
        }
    }
}
