using FsCheck.Xunit;
using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Indexes.Graph;
using Xunit;

namespace VectorKit.Tests.Indexes.Graph;

/// <summary>Properties of the graph index on arbitrary small inputs, with the exact index as the oracle.</summary>
public class GraphIndexProperties
{
    [Property(MaxTest = 150)]
    public void WithAWidthCoveringTheSet_SearchEqualsExactSearch(int[] components, byte dimensionSeed, byte kSeed, byte metricSeed, int querySeed)
    {
        // Small integer components make distance ties frequent: the graph must break them by id as the exact index does.
        DistanceMetric metric = (DistanceMetric)(metricSeed % 3);
        int d = 1 + (dimensionSeed % 8);
        int n = Math.Min(components.Length / d, 80);
        int k = 1 + (kSeed % 12);
        float[] data = components.Take(n * d).Select(c => (float)(Math.Abs(c % 7) - 3)).ToArray();
        var random = new Random(querySeed);
        float[] query = Enumerable.Range(0, d).Select(_ => (float)random.Next(-3, 4)).ToArray();
        if (metric == DistanceMetric.Cosine)
        {
            // Cosine rejects zero vectors: nudge them.
            for (int r = 0; r < n; r++)
            {
                if (data.AsSpan(r * d, d).IndexOfAnyExcept(0f) < 0)
                {
                    data[r * d] = 1;
                }
            }

            query[0] = query.AsSpan().IndexOfAnyExcept(0f) < 0 ? 1 : query[0];
        }

        long[] ids = Enumerable.Range(0, n).Select(i => (long)(((i * 37) % 101) - 50 + (101 * (i / 101)))).ToArray();
        using var graph = new GraphIndex(d, metric, new GraphIndexOptions { LinksPerNode = 6, BuildWidth = 100, Seed = querySeed });
        using var exact = new ExactIndex(d, metric);
        graph.AddRange(ids, data);
        exact.AddRange(ids, data);
        var wide = new SearchOptions { SearchWidth = 200 };

        // Equality needs every node reachable, which the structure check asserts first: pruning among many exact
        // duplicates cuts nodes off, and the reachability pass must have linked them back.
        GraphChecks.AssertSound(graph);
        Assert.Equal(exact.Search(query, k), graph.Search(query, k, wide));
        Assert.Equal(exact.Search(query, k), graph.SearchBatch(query, k, wide)[0].ToArray());
    }

    [Property(MaxTest = 100)]
    public void RandomInsertAndRemoveSequences_KeepTheGraphSound_AndEveryLiveItemFindable(int[] operations, byte linksSeed, bool compact)
    {
        const int d = 4;
        int links = 2 + (linksSeed % 6);
        using var graph = new GraphIndex(d, DistanceMetric.SquaredEuclidean, new GraphIndexOptions { LinksPerNode = links, BuildWidth = 32 });
        var live = new Dictionary<long, float[]>();
        var removed = new List<long>();
        int next = 0;
        foreach (int op in operations)
        {
            if (op % 4 == 0 && live.Count > 0)
            {
                long victim = live.Keys.Order().ElementAt(Math.Abs(op / 4) % live.Count);
                graph.Remove(victim);
                live.Remove(victim);
                removed.Add(victim);
            }
            else
            {
                // A few vectors at a time, some of them exact duplicates of earlier ones.
                int batch = 1 + Math.Abs(op % 5);
                long[] ids = Enumerable.Range(next, batch).Select(i => (long)i).ToArray();
                float[] vectors = Enumerable.Range(0, batch * d).Select(i => (float)(((op >> (i % 8)) + i) % 6)).ToArray();
                graph.AddRange(ids, vectors);
                for (int i = 0; i < batch; i++)
                {
                    live[ids[i]] = vectors.AsSpan(i * d, d).ToArray();
                }

                next += batch;
            }
        }

        if (compact)
        {
            graph.Compact();
        }
        else
        {
            GraphChecks.AssertSoundAfterSingleChanges(graph);
        }

        GraphChecks.AssertSound(graph);

        // Every live item found by its own vector, counts of min(k, live), the exact answer at a width covering the
        // set, removed ids never (LiveItemChecks says why each is an equality).
        LiveItemChecks.AssertEveryLiveItemFound(graph, live, removed);
    }

    [Property(MaxTest = 100)]
    public void WithoutTheGlobalPass_EveryChangeKeepsInDegreesExact_AndEveryLiveNodeLinkedFromSomewhere(int[] operations, byte linksSeed)
        => ReplayWithoutTheGlobalPass(operations, linksSeed);

    // Shrunk failures of the property above. In both, the entry point loses its last bottom-layer in-link (which it
    // does not need), then a later add with a higher level takes over as entry point: the old one must then be linked
    // again before that add ends.
    [Fact]
    public void WithoutTheGlobalPass_AnEntryPointCutOffByPruning_IsLinkedAgainWhenAHigherNodeTakesOver()
        => ReplayWithoutTheGlobalPass([0, 1, 0, 4, 1, 1, 1], 0);

    [Fact]
    public void WithoutTheGlobalPass_AnEntryPointCutOffByTheRemovalThatPromotedIt_IsLinkedAgainWhenAHigherNodeTakesOver()
        => ReplayWithoutTheGlobalPass([0, 0, 0, 1, 0, 0, 7, 0, 0, 2, 0, 0, -1, 0, 0, 1, 1, 0, 1], 0);

    // Another shrunk failure: two groups, each linked from outside only by one full list, whose members link to each
    // other. The global pass must link both back rather than cut one off to attach the other, round after round.
    [Fact]
    public void TheGlobalPass_TwoGroupsBehindOneFullList_BothEndReachable()
        => ReplayWithoutTheGlobalPass([1, 0, 2, 0, 2, -2, 0, -2, -1, -2, -2, 1, -1, 0, 1, 2], 0);

    // The local invariants, checked after every single change with the amortised global pass turned off: each
    // in-degree count equals the number of lists naming the node, and no live node but the entry point is left
    // without a bottom-layer in-link. The global pass then finishes with full reachability. An operation divisible by
    // 3 removes a live id (chosen by the rest of it), any other adds 1 to 4 vectors derived from its bits.
    private static void ReplayWithoutTheGlobalPass(int[] operations, byte linksSeed)
    {
        const int d = 4;
        int links = 2 + (linksSeed % 6);
        using var graph = new GraphIndex(d, DistanceMetric.SquaredEuclidean, new GraphIndexOptions { LinksPerNode = links, BuildWidth = 32, MaxDegreeOfParallelism = 1 });
        graph.FullPassDivisor = 0;
        var live = new Dictionary<long, float[]>();
        var removed = new List<long>();
        int next = 0;
        foreach (int op in operations)
        {
            if (op % 3 == 0 && live.Count > 0)
            {
                long victim = live.Keys.Order().ElementAt(Math.Abs(op / 3) % live.Count);
                graph.Remove(victim);
                live.Remove(victim);
                removed.Add(victim);
            }
            else
            {
                int batch = 1 + Math.Abs(op % 4);
                long[] ids = Enumerable.Range(next, batch).Select(i => (long)i).ToArray();
                float[] vectors = Enumerable.Range(0, batch * d).Select(i => (float)(((op >> (i % 8)) + i) % 5)).ToArray();
                graph.AddRange(ids, vectors);
                for (int i = 0; i < batch; i++)
                {
                    live[ids[i]] = vectors.AsSpan(i * d, d).ToArray();
                }

                next += batch;
            }

            List<string> problems = graph.CheckInvariants(reachability: false);
            Assert.True(problems.Count == 0, string.Join("; ", problems.Take(10)));
        }

        Assert.Equal(0, graph.FullPasses);
        graph.RunFullPass();
        GraphChecks.AssertSound(graph);
        LiveItemChecks.AssertEveryLiveItemFound(graph, live, removed);
    }
}
