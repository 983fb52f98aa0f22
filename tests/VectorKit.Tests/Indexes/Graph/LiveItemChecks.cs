using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Indexes.Graph;
using Xunit;

namespace VectorKit.Tests.Indexes.Graph;

/// <summary>
/// Search checks for a graph after a sequence of adds and removals, against a model of the live items (each id with the
/// vector it was added with) and, as the oracle, an exact index built here over exactly those items.
/// </summary>
/// <remarks>
/// <para>The caller asserts full reachability first (<see cref="GraphChecks.AssertSound"/>). Given that, the beam stops
/// only once it holds <c>width</c> eligible results, and the entry point, from which every live node is reachable, is
/// always among its candidates. So nothing here is approximate, and every check is an equality:</para>
/// <para>- an unfiltered search at any width (the default one included) returns <c>min(k, live count)</c> items, all
/// live, each with its true distance;</para>
/// <para>- at a width above the live count the beam never fills, expands every reachable node, and must give the exact
/// index's answer, ids and distances, ties by id: recall 1.0 for every query and every k. A small set is where a graph
/// can afford this, and any shortfall is then a bug (a node cut off, a removed node returned, a result dropped), not
/// the approximation a graph trades for speed on large sets;</para>
/// <para>- in particular every live item is found by its own vector with k = 1 (itself, or an exact duplicate with a
/// smaller id, at distance 0 under squared L2), and a search for everything lists each live id once and no removed
/// one.</para>
/// <para>Under 8-bit codes without full vectors the distances are to the decoded codes, so the oracle is a
/// double-precision loop over the rows <see cref="VectorIndex.TryGetVector"/> decodes, compared within a tolerance (equal
/// codes make ties whose order float rounding may decide, so ids are matched through distances there).</para>
/// </remarks>
internal static class LiveItemChecks
{
    public static void AssertEveryLiveItemFound(GraphIndex graph, IReadOnlyDictionary<long, float[]> live, IReadOnlyCollection<long> removed)
    {
        int d = graph.Dimension;
        int n = live.Count;
        Assert.Equal(n, graph.Count);
        var row = new float[d];
        foreach (long id in removed)
        {
            Assert.False(graph.Contains(id), $"removed id {id} is still contained");
            Assert.False(graph.TryGetVector(id, row), $"removed id {id} still has a vector");
        }

        long[] ids = [.. live.Keys.Order()];
        if (n == 0)
        {
            Assert.Empty(Find(graph, new float[d], 5, null));
            return;
        }

        bool codesOnly = graph.Options.Encoding == VectorEncoding.Scalar8Bit && !graph.KeepsFullVectors;

        // The rows the index measures: the vectors as added, or under codes alone their decoded codes.
        var stored = new Dictionary<long, float[]>(n);
        foreach (long id in ids)
        {
            Assert.True(graph.Contains(id), $"live id {id} is not contained");
            Assert.True(graph.TryGetVector(id, row), $"live id {id} has no vector");
            if (!codesOnly)
            {
                Assert.Equal(live[id], row);
            }

            stored[id] = [.. row];
        }

        // Everything, with room left for removed ids to show up if they could.
        var cover = new SearchOptions { SearchWidth = n + 1, RescoreDepth = graph.KeepsFullVectors ? n : null };
        float[] probe = [.. live[ids[0]].Select(x => x + 0.5f)];
        SearchHit[] all = Find(graph, probe, n + removed.Count + 1, cover);
        Assert.Equal(ids, all.Select(h => h.Id).Order());

        // The origin as a query too, except under cosine, where a zero vector has no direction.
        float[][] origin = graph.Metric == DistanceMetric.Cosine ? [] : [new float[d]];
        float[][] queries = [probe, .. origin, .. ids.Take(12).Select(id => stored[id])];
        if (codesOnly)
        {
            AssertAgainstDecodedCodes(graph, stored, ids, queries, cover);
            return;
        }

        using var exact = new ExactIndex(d, graph.Metric);
        exact.AddRange(ids, ids.SelectMany(id => live[id]).ToArray());

        // Every live item by its own vector.
        foreach (long id in ids)
        {
            float[] own = live[id];
            SearchHit[] nearest = Find(graph, own, 1, cover);
            Assert.Equal(exact.Search(own, 1), nearest);
            if (graph.Metric == DistanceMetric.SquaredEuclidean)
            {
                Assert.Equal(0f, nearest[0].Distance);
                Assert.Equal(own, live[nearest[0].Id]);
                Assert.True(nearest[0].Id <= id, $"id {id} found as {nearest[0].Id}, a later duplicate");
            }
        }

        foreach (float[] query in queries)
        {
            Dictionary<long, float> truth = exact.Search(query, n).ToDictionary(h => h.Id, h => h.Distance);
            foreach (int k in new[] { 1, 4, 17, n })
            {
                // Default width: the count, and true distances in order.
                SearchHit[] hits = Find(graph, query, k, null);
                Assert.Equal(Math.Min(k, n), hits.Length);
                Assert.All(hits, h => Assert.Equal(truth[h.Id], h.Distance));
                Assert.Equal(hits.OrderBy(h => h.Distance).ThenBy(h => h.Id), hits);

                // A width covering the set: the exact answer.
                Assert.Equal(exact.Search(query, k), Find(graph, query, k, cover));
            }
        }
    }

    // Under codes alone: distances to the decoded rows, in double precision.
    private static void AssertAgainstDecodedCodes(GraphIndex graph, Dictionary<long, float[]> decoded, long[] ids, float[][] queries, SearchOptions cover)
    {
        int n = ids.Length;
        Assert.Equal(DistanceMetric.SquaredEuclidean, graph.Metric);
        foreach (long id in ids)
        {
            // Its own decoded row is at distance 0 from its code: the item, or one with the same code.
            SearchHit[] nearest = Find(graph, decoded[id], 1, cover);
            Assert.Single(nearest);
            Assert.True(Math.Abs(nearest[0].Distance) <= 1e-4, $"id {id} found at {nearest[0].Distance}");
            Assert.Equal(decoded[id], decoded[nearest[0].Id]);
        }

        foreach (float[] query in queries)
        {
            Dictionary<long, double> reference = ids.ToDictionary(id => id, id => decoded[id].Select((x, j) => Math.Pow((double)query[j] - x, 2)).Sum());
            double[] sorted = [.. reference.Values.Order()];
            double tolerance = 1e-5 * (1 + sorted[^1]);
            foreach (int k in new[] { 1, 4, 17, n })
            {
                foreach (SearchOptions? options in new[] { null, cover })
                {
                    SearchHit[] hits = Find(graph, query, k, options);
                    Assert.Equal(Math.Min(k, n), hits.Length);
                    Assert.Equal(hits.Length, hits.Select(h => h.Id).Distinct().Count());
                    for (int i = 0; i < hits.Length; i++)
                    {
                        Assert.True(Math.Abs(hits[i].Distance - reference[hits[i].Id]) <= tolerance, $"hit {i}: {hits[i].Distance} vs {reference[hits[i].Id]}");
                        if (options is not null)
                        {
                            Assert.True(Math.Abs(hits[i].Distance - sorted[i]) <= 2 * tolerance, $"hit {i} is not the {i}th nearest code: {hits[i].Distance} vs {sorted[i]}");
                        }
                    }
                }
            }
        }
    }

    // Every search of these checks goes through here.
    private static SearchHit[] Find(GraphIndex graph, ReadOnlySpan<float> query, int k, SearchOptions? options) => graph.Search(query, k, options);
}
