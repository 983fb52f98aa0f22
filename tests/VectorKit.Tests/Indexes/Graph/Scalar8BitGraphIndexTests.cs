using FsCheck.Xunit;
using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Indexes.Graph;
using VectorKit.Quantization;
using VectorKit.Tests.Indexes.Contract;
using VectorKit.Tests.TestData;
using Xunit;

namespace VectorKit.Tests.Indexes.Graph;

/// <summary>
/// The graph index under 8-bit scalar codes: training rules, the walk's distances against an independent
/// double-precision loop over the decoded codes, exact re-scoring against the exact index, and the graph invariants.
/// (The name contains "GraphIndexTests" so scripts/test.sh re-runs it on the narrower SIMD paths.)
/// </summary>
public class Scalar8BitGraphIndexTests
{
    private static GraphIndexOptions Codes(int depth = 0, int links = 6, int seed = 42) => new()
    {
        Encoding = VectorEncoding.Scalar8Bit,
        RescoreDepth = depth,
        LinksPerNode = links,
        BuildWidth = 48,
        Seed = seed,
        MaxDegreeOfParallelism = 1,
    };

    [Fact]
    public void Float32Storage_IsTrainedFromTheStart_AndTrainOnlyValidates()
    {
        using var graph = new GraphIndex(3, DistanceMetric.SquaredEuclidean);
        Assert.True(graph.IsTrained);
        Assert.False(graph.KeepsFullVectors);
        graph.Add(1, [1, 2, 3]);
        graph.Train([0, 0, 0, 5, 5, 5]);
        Assert.Equal(1, graph.Search([1, 2, 3], 1).Single().Id);
        Assert.Contains("multiple of the index dimension 3", Assert.Throws<ArgumentException>(() => graph.Train([1, 2])).Message);
        Assert.Throws<ArgumentException>(() => graph.Train([]));
        Assert.Throws<ArgumentException>(() => graph.Train([1, float.NaN, 3]));
        Assert.Equal(12, graph.CodeBytesPerVector);
    }

    [Fact]
    public void BeforeTraining_AddsAndSearchesThrow_AndTheIndexStaysEmpty()
    {
        using var graph = new GraphIndex(3, DistanceMetric.SquaredEuclidean, Codes());
        Assert.False(graph.IsTrained);
        var e = Assert.Throws<IndexNotTrainedException>(() => graph.Add(1, [1, 2, 3]));
        Assert.Contains("call Train", e.Message, StringComparison.Ordinal);
        Assert.Throws<IndexNotTrainedException>(() => graph.AddRange([1, 2], [1, 2, 3, 4, 5, 6]));
        Assert.Throws<IndexNotTrainedException>(() => graph.Search([1, 2, 3], 1));
        Assert.Throws<IndexNotTrainedException>(() => graph.SearchBatch([1, 2, 3], 1));
        Assert.Equal(0, graph.Count);
        Assert.Equal(16, graph.CodeBytesPerVector);
    }

    [Fact]
    public void BadSamples_AreRejectedWithTheReason_AndLeaveTheIndexUntrained()
    {
        using var graph = new GraphIndex(3, DistanceMetric.Cosine, Codes());
        Assert.Contains("at least 1 row and a multiple of the index dimension 3", Assert.Throws<ArgumentException>(() => graph.Train([])).Message, StringComparison.Ordinal);
        Assert.Contains("sample has 4 components", Assert.Throws<ArgumentException>(() => graph.Train([1, 2, 3, 4])).Message, StringComparison.Ordinal);
        Assert.Equal("sample", Assert.Throws<ArgumentException>(() => graph.Train([1, float.NaN, 3])).ParamName);
        Assert.Throws<ArgumentException>(() => graph.Train([1, 1, 1, 0, 0, 0]));
        using var cancelled = new CancellationTokenSource();
        cancelled.Cancel();
        Assert.Throws<OperationCanceledException>(() => graph.Train([1, 2, 3], null, cancelled.Token));
        Assert.False(graph.IsTrained);
    }

    [Fact]
    public void TrainingAfterAdds_Throws_AndChangesNothing()
    {
        using var graph = new GraphIndex(3, DistanceMetric.SquaredEuclidean, Codes());
        var stages = new List<IndexTrainingProgress>();
        graph.Train([0, 0, 0, 4, 4, 4], new SynchronousProgress<IndexTrainingProgress>(stages.Add));
        Assert.Equal([new IndexTrainingProgress(IndexTrainingStage.TrainingQuantizer, 1, 1)], stages);
        graph.AddRange([1, 2], [1, 1, 1, 3, 3, 3]);
        SearchHit[] before = graph.Search([1, 1, 1], 2);
        var e = Assert.Throws<InvalidOperationException>(() => graph.Train([0, 0, 0, 100, 100, 100]));
        Assert.Contains("stores 2 vectors", e.Message, StringComparison.Ordinal);

        // Removed items still hold codes of the old ranges until compaction.
        graph.RemoveRange([1, 2]);
        Assert.Throws<InvalidOperationException>(() => graph.Train([0, 0, 0, 100, 100, 100]));
        Assert.Empty(graph.Search([1, 1, 1], 2));
        graph.Compact();
        graph.Train([0, 0, 0, 100, 100, 100]);
        graph.AddRange([1, 2], [1, 1, 1, 3, 3, 3]);
        Assert.Equal(before.Select(h => h.Id), graph.Search([1, 1, 1], 2).Select(h => h.Id));
    }

    [Fact]
    public void TryGetVector_IsTheFullVectorWhenKept_ElseTheDecodedCodeWithinHalfAStep()
    {
        float[] data = ClusteredData.Generate(50, 7, 3, 0.4f, 3);
        using var codesOnly = new GraphIndex(7, DistanceMetric.SquaredEuclidean, Codes());
        using var withFull = new GraphIndex(7, DistanceMetric.SquaredEuclidean, Codes(depth: 5));
        long[] ids = Enumerable.Range(0, 50).Select(i => (long)i).ToArray();
        foreach (GraphIndex g in new[] { codesOnly, withFull })
        {
            g.Train(data);
            g.AddRange(ids, data);
        }

        ScalarQuantizer reference = ScalarQuantizer.Train(data, 7);
        var row = new float[7];
        for (int i = 0; i < 50; i++)
        {
            Assert.True(withFull.TryGetVector(i, row));
            Assert.Equal(data.AsSpan(i * 7, 7).ToArray(), row);
            Assert.True(codesOnly.TryGetVector(i, row));
            for (int j = 0; j < 7; j++)
            {
                Assert.True(Math.Abs(row[j] - data[(i * 7) + j]) <= (reference.Steps[j] * 0.5) + 1e-5, $"item {i}, component {j}");
            }
        }

        // Codes take the dimension rounded up to 16 bytes; full vectors add 4 bytes a component.
        Assert.Equal(16, codesOnly.CodeBytesPerVector);
        Assert.True(withFull.MemoryBytes - codesOnly.MemoryBytes >= 50 * 7 * sizeof(float));
        Assert.True(withFull.KeepsFullVectors && !codesOnly.KeepsFullVectors);
    }

    [Property(MaxTest = 80)]
    public void WithAWidthCoveringTheSet_DistancesAreThoseOfTheDecodedCodes(int[] components, byte dimensionSeed, byte kSeed, byte metricSeed, int querySeed)
    {
        // Oracle: a double-precision loop over the vectors the quantizer's public Decode gives back.
        DistanceMetric metric = (DistanceMetric)(metricSeed % 3);
        int d = 1 + (dimensionSeed % 40);
        int n = Math.Min(components.Length / d, 60);
        int k = 1 + (kSeed % 10);
        float[] data = Rows(components, n, d, querySeed);
        var random = new Random(querySeed);
        float[] query = Enumerable.Range(0, d).Select(_ => (float)((random.NextDouble() * 6) - 3)).ToArray();
        query[0] = query[0] == 0 ? 1 : query[0];
        using var graph = new GraphIndex(d, metric, Codes(seed: querySeed));
        graph.Train(n > 0 ? data : query);
        long[] ids = Enumerable.Range(0, n).Select(i => (long)(i * 3)).ToArray();
        graph.AddRange(ids, data);
        GraphChecks.AssertSound(graph);

        float[] unitQuery = metric == DistanceMetric.Cosine ? Unit(query) : query;
        var decoded = new float[d];
        var reference = new Dictionary<long, double>();
        foreach (long id in ids)
        {
            Assert.True(graph.TryGetVector(id, decoded));
            double sum = 0;
            for (int j = 0; j < d; j++)
            {
                sum += metric == DistanceMetric.SquaredEuclidean ? Math.Pow((double)unitQuery[j] - decoded[j], 2) : (double)unitQuery[j] * decoded[j];
            }

            reference[id] = metric switch { DistanceMetric.SquaredEuclidean => sum, DistanceMetric.InnerProduct => -sum, _ => 1 - sum };
        }

        SearchHit[] hits = graph.Search(query, k, new SearchOptions { SearchWidth = 200 });
        Assert.Equal(Math.Min(k, n), hits.Length);
        double scale = 1 + reference.Values.Select(Math.Abs).DefaultIfEmpty(0).Max() + (d * 20);
        double tolerance = 1e-5 * scale;
        double[] sorted = [.. reference.Values.Order()];
        for (int i = 0; i < hits.Length; i++)
        {
            Assert.True(Math.Abs(hits[i].Distance - reference[hits[i].Id]) <= tolerance, $"hit {i}: {hits[i].Distance} vs {reference[hits[i].Id]}");
            Assert.True(Math.Abs(hits[i].Distance - sorted[i]) <= 2 * tolerance, $"hit {i} is not the {i}th nearest code: {hits[i].Distance} vs {sorted[i]}");
        }
    }

    [Property(MaxTest = 80)]
    public void WithReScoring_DistancesEqualTheExactIndexBitForBit(int[] components, byte dimensionSeed, byte depthSeed, byte metricSeed, int querySeed, bool filtered)
    {
        DistanceMetric metric = (DistanceMetric)(metricSeed % 3);
        int d = 1 + (dimensionSeed % 40);
        int n = Math.Min(components.Length / d, 80);
        int depth = 1 + (depthSeed % 40);
        float[] data = Rows(components, n, d, querySeed);
        var random = new Random(querySeed);
        float[] query = Enumerable.Range(0, d).Select(_ => (float)((random.NextDouble() * 6) - 3)).ToArray();
        query[0] = query[0] == 0 ? 1 : query[0];
        long[] ids = Enumerable.Range(0, n).Select(i => (long)(i * 5) - 7).ToArray();
        using var graph = new GraphIndex(d, metric, Codes(depth: depth, seed: querySeed));
        using var exact = new ExactIndex(d, metric);
        graph.Train(n > 0 ? data : query);
        graph.AddRange(ids, data);
        exact.AddRange(ids, data);
        GraphChecks.AssertSound(graph);
        Dictionary<long, float> truth = exact.Search(query, Math.Max(1, n)).ToDictionary(h => h.Id, h => h.Distance);

        int k = 1 + (querySeed & 7);
        Func<long, bool>? filter = filtered ? id => (id & 1) == 0 : null;
        SearchHit[] hits = graph.Search(query, k, new SearchOptions { Filter = filter });

        // Every node is reachable and the beam stops only when full, so a search returns min(k, passing) items.
        int passing = filter is null ? n : ids.Count(filter);
        Assert.Equal(Math.Min(k, passing), hits.Length);
        foreach (SearchHit hit in hits)
        {
            Assert.Equal(truth[hit.Id], hit.Distance);
            Assert.True(filter is null || filter(hit.Id));
        }

        Assert.Equal(hits.OrderBy(h => h.Distance).ThenBy(h => h.Id), hits);

        // Re-scoring everything a width covering the set reaches gives the exact index's answer, filtered or not.
        var all = new SearchOptions { SearchWidth = 200, RescoreDepth = Math.Max(1, n), Filter = filter };
        SearchHit[] expected = exact.Search(query, k, new SearchOptions { Filter = filter });
        Assert.Equal(Math.Min(k, passing), expected.Length);
        Assert.Equal(expected, graph.Search(query, k, all));
        Assert.Equal(expected, graph.SearchBatch(query, k, all)[0].ToArray());
    }

    [Property(MaxTest = 80)]
    public void RandomInsertAndRemoveSequences_KeepTheGraphSound_AndEveryLiveItemFindable(int[] operations, byte linksSeed, bool compact, bool keepFull)
    {
        const int d = 5;
        using var graph = new GraphIndex(d, DistanceMetric.SquaredEuclidean, Codes(depth: keepFull ? 4 : 0, links: 2 + (linksSeed % 6)));
        graph.Train([0, 0, 0, 0, 0, 5, 5, 5, 5, 5]);
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
                // A few at a time; small integers make exact duplicates (equal codes) frequent.
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

        // As for float32 storage (GraphIndexProperties): the local invariants hold after every change, full
        // reachability once the global pass has run (between passes a group cut off by pruning may wait for it, as the
        // class documents).
        if (compact)
        {
            graph.Compact();
        }
        else
        {
            GraphChecks.AssertSoundAfterSingleChanges(graph);
        }

        GraphChecks.AssertSound(graph);

        // Every live item found by its own vector (decoded, under codes alone), counts of min(k, live), the exact
        // index's answer (with full vectors, re-scoring everything) or the decoded codes' order (without) at a width
        // covering the set, removed ids never. Negative components fall outside the trained range and are clamped, so
        // distinct vectors can share a code: the checks allow for that (see LiveItemChecks).
        LiveItemChecks.AssertEveryLiveItemFound(graph, live, removed);
    }

    [Fact]
    public void ReScoreDepth_OfTheSearchOverridesTheIndex_AndZeroTurnsItOff()
    {
        float[] data = ClusteredData.Generate(300, 12, 5, 0.5f, 9);
        long[] ids = Enumerable.Range(0, 300).Select(i => (long)i).ToArray();
        using var graph = new GraphIndex(12, DistanceMetric.SquaredEuclidean, Codes(depth: 30));
        using var exact = new ExactIndex(12, DistanceMetric.SquaredEuclidean);
        graph.Train(data);
        graph.AddRange(ids, data);
        exact.AddRange(ids, data);
        float[] query = data.AsSpan(0, 12).ToArray();
        query[0] += 0.01f;
        Dictionary<long, float> truth = exact.Search(query, 300).ToDictionary(h => h.Id, h => h.Distance);
        SearchHit[] rescored = graph.Search(query, 10);
        Assert.All(rescored, h => Assert.Equal(truth[h.Id], h.Distance));
        SearchHit[] approximate = graph.Search(query, 10, new SearchOptions { RescoreDepth = 0 });
        Assert.Contains(approximate, h => h.Distance != truth[h.Id]);
    }

    private static float[] Rows(int[] components, int n, int d, int seed)
    {
        var random = new Random(seed);
        var data = new float[n * d];
        for (int i = 0; i < data.Length; i++)
        {
            data[i] = (Math.Abs(components[i] % 9) - 4) + (float)(random.NextDouble() * 0.5);
        }

        for (int r = 0; r < n; r++)
        {
            if (data.AsSpan(r * d, d).IndexOfAnyExcept(0f) < 0)
            {
                data[r * d] = 1;
            }
        }

        return data;
    }

    private static float[] Unit(float[] v)
    {
        double norm = Math.Sqrt(v.Sum(x => (double)x * x));
        return v.Select(x => (float)(x / norm)).ToArray();
    }
}
