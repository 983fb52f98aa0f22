using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Indexes.Graph;
using VectorKit.Indexes.InvertedFile;
using VectorKit.Persistence;
using VectorKit.Tests.Indexes.Contract;
using VectorKit.Tests.TestData;
using Xunit.Abstractions;

namespace VectorKit.Tests.Persistence.Mapped;

/// <summary>
/// One set of checks of <see cref="SegmentedIndex"/> over every kind of base it takes (float32 exact, 8-bit exact
/// re-scoring, float32 graph, 8-bit graph re-scoring, inverted file of product codes re-scoring), against a naive model: a dictionary of
/// each id's latest vector and a double-precision brute-force top k. Adds, replacements and removals of base and segment
/// items, then searches, a merge and its file, and merges that fail.
/// </summary>
public sealed class SegmentedIndexKindTests : IDisposable
{
    private const int Dim = 16;
    private const int BaseCount = 1500;
    private const int NewCount = 500;
    private const int QueryCount = 100;
    private const int K = 10;

    // How far an approximate base's recall@10 may fall below its reference: with writes in segments, the same kind
    // built in memory from the same items (the segments, exact, lift it well above); after a merge, the base file
    // loaded and given the same writes by the kind itself. 100 queries × 10 put about ±0.02 of noise between two
    // such indexes (two standard deviations of a binomial near recall 0.85); a broken merge (lost links, items in the
    // wrong lists) loses far more.
    private const double RecallTolerance = 0.04;

    // Rows 0..1499 the base, 1500..1999 new items, 2000..2299 replacements, 2300..2399 queries, 2400..2499 items written
    // while other threads search: one distribution.
    private static readonly float[] Data = ClusteredData.Generate(BaseCount + NewCount + 300 + QueryCount + 100, Dim, 12, 0.3f, seed: 21);

    private readonly TempFolder _folder = new();
    private readonly ITestOutputHelper _output;

    public SegmentedIndexKindTests(ITestOutputHelper output) => _output = output;

    private static readonly string[] s_kinds = ["exact", "exact-8bit-rescore", "graph-float32", "graph-8bit-full", "ivf-product-rescore"];

    public static TheoryData<string> Kinds => new(s_kinds);

    // The merge under both metrics that change what is stored: squared L2 keeps rows as given, cosine normalises them.
    public static TheoryData<string, DistanceMetric> KindsAndMetrics
    {
        get
        {
            var data = new TheoryData<string, DistanceMetric>();
            foreach (string kind in s_kinds)
            {
                data.Add(kind, DistanceMetric.SquaredEuclidean);
                data.Add(kind, DistanceMetric.Cosine);
            }

            return data;
        }
    }

    public void Dispose() => _folder.Dispose();

    [Theory]
    [MemberData(nameof(Kinds))]
    public void LiveWrites_KeepEveryAcknowledgedItem_AndFindWhatTheKindFindsInMemory(string kind)
    {
        using Live live = Start(kind);
        AssertHoldsTheModel(live.Index, live);
        double recall = CheckSearches(live.Index, live, out SearchHit[][] got);

        double reference = InMemoryRecall(kind, live, out SearchHit[][] expected);
        _output.WriteLine($"{kind}: recall@{K} {recall:F3} segmented, {reference:F3} in memory");
        if (kind == "exact")
        {
            // Exact: the same ids and distances as one in-memory exact index with the same items.
            Assert.Equal(1.0, recall);
            Assert.Equal(expected, got);
        }
        else
        {
            Assert.True(recall >= reference - RecallTolerance, $"recall@{K} {recall:F3} segmented vs {reference:F3} for the same kind in memory");
        }
    }

    [Theory]
    [MemberData(nameof(KindsAndMetrics))]
    public async Task AMerge_WritesAFileOfTheBasesKindAndOptions_ThatSearchesAsBefore(string kind, DistanceMetric metric)
    {
        using Live live = Start(kind, metric);
        double before = CheckSearches(live.Index, live, out SearchHit[][] hitsBefore);
        var counts = new List<int>();
        string merged = _folder.File("merged.vkx");
        await live.Index.MergeAsync(merged, new SynchronousProgress<int>(counts.Add));

        Assert.Equal((0, 0), (live.Index.SegmentCount, live.Index.MaskedCount));
        Assert.Equal(live.Model.Count, counts[^1]);
        Assert.True(counts.SequenceEqual(counts.Order()), "progress counts rise");
        AssertHoldsTheModel(live.Index, live);
        double after = CheckSearches(live.Index, live with { SegmentIds = [] }, out SearchHit[][] hitsAfter);
        double edited = EditedInMemoryRecall(kind, live);
        _output.WriteLine($"{kind}, {metric}: recall@{K} {before:F3} before the merge, {after:F3} after, {edited:F3} for the base loaded and given the same writes, {InMemoryRecall(kind, live, out _):F3} for the same items built anew");

        // The file is the base's kind with its stored settings, and reopens mapped with the same items.
        IndexFileSummary original = IndexFile.Inspect(live.BasePath);
        IndexFileSummary written = IndexFile.Inspect(merged, verifySections: true);
        Assert.Equal(original.Kind, written.Kind);
        Assert.Equal(original.Settings, written.Settings);
        using (var reopened = (VectorIndex)IndexFile.OpenMapped(merged, MappedOpenOptions.Untrusted))
        {
            Assert.Equal(live.BaseType, reopened.GetType());
            AssertHoldsTheModel(reopened, live);
        }

        if (kind == "exact")
        {
            Assert.Equal(hitsBefore, hitsAfter);
        }
        else
        {
            // Before the merge a quarter of the items were in exact segments; after it they are in the base's own
            // structure, so the file is held to what the base's kind finds when its file is loaded and given the
            // same writes directly (a graph with many removals finds less than one built anew, merged or not).
            Assert.True(after >= edited - RecallTolerance, $"recall@{K} {after:F3} after the merge vs {edited:F3} for the base loaded and given the same writes");
        }

        // A merge onto the very file the base is mapped from (the mapping keeps the old contents until the swap).
        for (int i = 0; i < 5; i++)
        {
            long id = 3L * (1200 + i);
            float[] row = Row(2400 + i);
            Assert.True(live.Index.AddOrReplace(id, row));
            live.Model[id] = row;
            live.Index.Remove(10_200 + i);
            live.Model.Remove(10_200 + i);
        }

        await live.Index.MergeAsync(merged);
        Assert.Equal((0, 0), (live.Index.SegmentCount, live.Index.MaskedCount));
        AssertHoldsTheModel(live.Index, live);

        // A save of the merged state loads as the same items too.
        string saved = _folder.File("saved.vkx");
        live.Index.Save(saved);
        using var loaded = (VectorIndex)IndexFile.Load(saved, IndexLoadOptions.Untrusted);
        Assert.Equal(live.BaseType, loaded.GetType());
        AssertHoldsTheModel(loaded, live);
    }

    [Theory]
    [MemberData(nameof(Kinds))]
    public async Task AFailedMerge_LosesNothing_AndTheNextOneFoldsEverything(string kind)
    {
        using Live live = Start(kind);
        int segment = live.Index.SegmentCount;
        int masked = live.Index.MaskedCount;

        // The folder of the target disappears part-way (at the first progress report).
        string folder = Path.Combine(_folder.Path, "going");
        Directory.CreateDirectory(folder);
        var vanish = new ActionProgress(() => Directory.Delete(folder, recursive: true));
        await Assert.ThrowsAnyAsync<IOException>(() => live.Index.MergeAsync(Path.Combine(folder, "merged.vkx"), vanish));
        AssertUnchanged();

        // A cancelled token.
        using var cancel = new CancellationTokenSource();
        string target = _folder.File("cancelled.vkx");
        await Assert.ThrowsAnyAsync<OperationCanceledException>(() => live.Index.MergeAsync(target, new ActionProgress(cancel.Cancel), cancel.Token));
        Assert.False(File.Exists(target));
        AssertUnchanged();

        // Writes after the failures, then a merge that succeeds, with more writes landing while it runs: removals and
        // replacements of items it folds, and new items.
        for (int i = 0; i < 10; i++)
        {
            long id = 3 * (900 + i);
            live.Index.Remove(id);
            live.Model.Remove(id);
            float[] row = Row(2250 + i);
            live.Index.Add(50_000 + i, row);
            live.Model[50_000 + i] = row;
        }

        Task merge = live.Index.MergeAsync(_folder.File("merged.vkx"));
        var during = new HashSet<long>();
        for (int i = 0; i < 20; i++)
        {
            long folded = i % 2 == 0 ? 3L * (1000 + i) : 10_100L + i;
            if (i % 4 < 2)
            {
                live.Index.Remove(folded);
                live.Model.Remove(folded);
            }
            else
            {
                float[] replacement = Row(2260 + i);
                Assert.True(live.Index.AddOrReplace(folded, replacement));
                live.Model[folded] = replacement;
                during.Add(folded);
            }

            float[] row = Row(2280 + i);
            live.Index.Add(60_000 + i, row);
            live.Model[60_000 + i] = row;
            during.Add(60_000 + i);
        }

        await merge;
        Assert.Equal(during.Count, live.Index.SegmentCount);
        AssertHoldsTheModel(live.Index, live);
        CheckSearches(live.Index, live with { SegmentIds = during }, out _);
        await live.Index.MergeAsync(_folder.File("merged-again.vkx"));
        Assert.Equal((0, 0), (live.Index.SegmentCount, live.Index.MaskedCount));
        AssertHoldsTheModel(live.Index, live);
        CheckSearches(live.Index, live with { SegmentIds = [] }, out _);

        void AssertUnchanged()
        {
            Assert.False(live.Index.IsMerging);
            Assert.Equal((segment, masked), (live.Index.SegmentCount, live.Index.MaskedCount));
            AssertHoldsTheModel(live.Index, live);
            CheckSearches(live.Index, live, out _);
        }
    }

    [Theory]
    [MemberData(nameof(Kinds))]
    public async Task SearchesOnOtherThreads_DuringWritesSavesAndMerges_SeeWholeStates(string kind)
    {
        using Live live = Start(kind);
        var ever = new HashSet<long>(live.Model.Keys);
        for (int i = 0; i < 60; i++)
        {
            ever.Add(70_000 + i);
        }

        using var stop = new CancellationTokenSource();
        int searches = 0;
        Task[] readers = [.. Enumerable.Range(0, 2).Select(r => Task.Run(() =>
        {
            float[] query = Row(BaseCount + NewCount + 300 + r);
            while (!stop.IsCancellationRequested)
            {
                // Every state holds well over k items, so a whole state gives k distinct items ever written, best first.
                SearchHit[] hits = live.Index.Search(query, K);
                Assert.Equal(K, hits.Length);
                Assert.Equal(K, hits.Select(h => h.Id).Distinct().Count());
                Assert.True(hits.SequenceEqual(hits.Order()), "hits are best first, ties by id");
                Assert.All(hits, h => Assert.Contains(h.Id, ever));
                Interlocked.Increment(ref searches);
            }
        }))];

        for (int round = 0; round < 3; round++)
        {
            for (int i = 0; i < 20; i++)
            {
                long gone = 3L * (1000 + (round * 20) + i);
                live.Index.Remove(gone);
                live.Model.Remove(gone);
                float[] row = Row(2400 + (round * 20) + i);
                live.Index.Add(70_000 + (round * 20) + i, row);
                live.Model[70_000 + (round * 20) + i] = row;
            }

            live.Index.Save(_folder.File($"snapshot-{round}.vkx"));
            await live.Index.MergeAsync(_folder.File(round % 2 == 0 ? "a.vkx" : "b.vkx"));
        }

        await stop.CancelAsync();
        await Task.WhenAll(readers);
        Assert.True(searches > 0);
        AssertHoldsTheModel(live.Index, live);
        CheckSearches(live.Index, live with { SegmentIds = [] }, out _);
        using var snapshot = (VectorIndex)IndexFile.Load(_folder.File("snapshot-2.vkx"));
        AssertHoldsTheModel(snapshot, live);
    }

    [Theory]
    [MemberData(nameof(Kinds))]
    public void SearchOptions_ReachTheBase(string kind)
    {
        string path = _folder.File("base.vkx");
        using (VectorIndex built = Build(kind, Ids(BaseCount), Data.AsSpan(0, BaseCount * Dim)))
        {
            IndexFile.Save(built, path);
        }

        using var mapped = (VectorIndex)IndexFile.OpenMapped(path);
        using SegmentedIndex segmented = SegmentedIndex.Open(path);
        SearchOptions[] settings =
        [
            SearchOptions.Default,
            new() { SearchWidth = 1 },
            new() { SearchWidth = 2, RescoreDepth = 1 },
            new() { Filter = id => id % 2 == 1 },
        ];
        for (int q = 0; q < 20; q++)
        {
            float[] query = Row(BaseCount + NewCount + 300 + q);
            foreach (SearchOptions options in settings)
            {
                Assert.Equal(mapped.Search(query, K, options), segmented.Search(query, K, options));
            }
        }
    }

    [Fact]
    public void BasesWhoseDistancesAreCodeApproximations_AreRefused()
    {
        using GraphIndex codesOnly = PersistenceSamples.ScalarGraph();
        ArgumentException graph = Assert.Throws<ArgumentException>(() => new SegmentedIndex(codesOnly));
        Assert.Equal("A segmented index needs a base whose searches return full-precision distances; this GraphIndex stores Scalar8Bit codes without re-scoring, so its distances are the codes' approximations and cannot be merged with a float32 segment's. (Parameter 'baseIndex')", graph.Message);

        using InvertedFileIndex products = PersistenceSamples.InvertedFile(VectorEncoding.ProductCodes);
        ArgumentException inverted = Assert.Throws<ArgumentException>(() => new SegmentedIndex(products));
        Assert.StartsWith("A segmented index needs a base whose searches return full-precision distances; this InvertedFileIndex stores ProductCodes codes without re-scoring", inverted.Message, StringComparison.Ordinal);

        using GraphIndex external = PersistenceSamples.ScalarGraph(rescoreDepth: 5, fullVectors: FullVectorLocation.ExternalSource);
        ArgumentException source = Assert.Throws<ArgumentException>(() => new SegmentedIndex(external));
        Assert.StartsWith("A segmented index needs a base that keeps its full vectors in the index; this GraphIndex re-scores from an external source", source.Message, StringComparison.Ordinal);

        using GraphIndex tunedOff = PersistenceSamples.ScalarGraph(rescoreDepth: 5);
        tunedOff.ApplyTunedDefaults(new TunedSearchDefaults(null, 0, 0.9, 10));
        ArgumentException tuned = Assert.Throws<ArgumentException>(() => new SegmentedIndex(tunedOff));
        Assert.StartsWith("A segmented index needs a base whose searches return full-precision distances; this GraphIndex's tuned defaults turn re-scoring off", tuned.Message, StringComparison.Ordinal);

        using var untrained = new InvertedFileIndex(4, DistanceMetric.SquaredEuclidean, new InvertedFileOptions { ListCount = 2 });
        ArgumentException training = Assert.Throws<ArgumentException>(() => new SegmentedIndex(untrained));
        Assert.StartsWith("A segmented index needs a trained base; this InvertedFileIndex is not trained", training.Message, StringComparison.Ordinal);

        // A base that re-scores is taken, and a search cannot turn its re-scoring off.
        string path = _folder.File("rescoring.vkx");
        using (GraphIndex rescoring = PersistenceSamples.ScalarGraph(rescoreDepth: 5))
        {
            IndexFile.Save(rescoring, path);
        }

        using SegmentedIndex segmented = SegmentedIndex.Open(path);
        float[] query = [0.1f, 0.2f, 0.3f, 0.4f];
        ArgumentException off = Assert.Throws<ArgumentException>(() => segmented.Search(query, 3, new SearchOptions { RescoreDepth = 0 }));
        Assert.Equal("options", off.ParamName);
        Assert.Equal(3, segmented.Search(query, 3, new SearchOptions { RescoreDepth = 1 }).Length);
    }

    // A base of the kind saved and opened segmented, then adds, replacements and removals of base and segment items,
    // mirrored into the model.
    private Live Start(string kind, DistanceMetric metric = DistanceMetric.SquaredEuclidean)
    {
        string path = _folder.File($"base-{kind}.vkx");
        Type type;
        using (VectorIndex built = Build(kind, Ids(BaseCount), Data.AsSpan(0, BaseCount * Dim), metric))
        {
            IndexFile.Save(built, path);
            type = built.GetType();
        }

        var model = new Dictionary<long, float[]>();
        for (int i = 0; i < BaseCount; i++)
        {
            model[3L * i] = Row(i);
        }

        SegmentedIndex index = SegmentedIndex.Open(path);
        var segmentIds = new HashSet<long>();

        // New items: half in one batch, half one at a time.
        long[] fresh = Enumerable.Range(0, NewCount).Select(i => 10_000L + i).ToArray();
        index.AddRange(fresh.AsSpan(0, NewCount / 2), Data.AsSpan(BaseCount * Dim, NewCount / 2 * Dim));
        for (int i = 0; i < NewCount; i++)
        {
            if (i >= NewCount / 2)
            {
                index.Add(fresh[i], Row(BaseCount + i));
            }

            model[fresh[i]] = Row(BaseCount + i);
            segmentIds.Add(fresh[i]);
        }

        // Replacements of base items (0..199) and of segment items (10,000..10,049).
        for (int i = 0; i < 250; i++)
        {
            long id = i < 200 ? 3L * i : 10_000L + (i - 200);
            float[] row = Row(BaseCount + NewCount + i);
            Assert.True(index.AddOrReplace(id, row));
            model[id] = row;
            segmentIds.Add(id);
        }

        // Removals: base items never touched (600..749), base items replaced first (0..19), segment items (10,400..10,449).
        long[] removed = [.. Enumerable.Range(600, 150).Select(i => 3L * i), .. Enumerable.Range(0, 20).Select(i => 3L * i), .. Enumerable.Range(10_400, 50).Select(i => (long)i)];
        index.RemoveRange(removed);
        foreach (long id in removed)
        {
            model.Remove(id);
            segmentIds.Remove(id);
        }

        Assert.Equal(BaseCount + NewCount - removed.Length, index.Count);
        return new Live(index, model, segmentIds) { BasePath = path, BaseType = type, Metric = metric };
    }

    // Recall@k of the kind built in memory from the model's items.
    private static double InMemoryRecall(string kind, Live live, out SearchHit[][] results)
    {
        using VectorIndex inMemory = Build(kind, [.. live.Model.Keys], [.. live.Model.Values.SelectMany(v => v)], live.Metric);
        return CheckSearches(inMemory, live with { SegmentIds = [] }, out results);
    }

    // Recall@k of the base file loaded into memory and brought to the model's items by the kind's own removals and adds.
    private static double EditedInMemoryRecall(string kind, Live live)
    {
        using var loaded = (VectorIndex)IndexFile.Load(live.BasePath);
        var stale = new List<long>();
        for (int i = 0; i < BaseCount; i++)
        {
            if (!live.Model.TryGetValue(3L * i, out float[]? now) || !now.AsSpan().SequenceEqual(Row(i)))
            {
                stale.Add(3L * i);
            }
        }

        loaded.RemoveRange(stale.ToArray());
        long[] added = [.. live.Model.Keys.Where(id => !loaded.Contains(id)).Order()];
        loaded.AddRange(added, [.. added.SelectMany(id => live.Model[id])]);
        return CheckSearches(loaded, live with { SegmentIds = [] }, out _);
    }

    // The kind built in memory from the given items, trained on them.
    private static VectorIndex Build(string kind, ReadOnlySpan<long> ids, ReadOnlySpan<float> rows, DistanceMetric metric = DistanceMetric.SquaredEuclidean)
    {
        VectorIndex index = kind switch
        {
            "exact" => new ExactIndex(Dim, metric),
            "exact-8bit-rescore" => new ExactIndex(Dim, metric, new ExactIndexOptions { Encoding = VectorEncoding.Scalar8Bit, RescoreDepth = 12 }),
            "graph-float32" => new GraphIndex(Dim, metric, new GraphIndexOptions { LinksPerNode = 5, BuildWidth = 24, SearchWidth = 10, Seed = 3, MaxDegreeOfParallelism = 1 }),
            "graph-8bit-full" => new GraphIndex(Dim, metric, new GraphIndexOptions { LinksPerNode = 5, BuildWidth = 24, SearchWidth = 10, Seed = 3, MaxDegreeOfParallelism = 1, Encoding = VectorEncoding.Scalar8Bit, RescoreDepth = 10 }),
            "ivf-product-rescore" => new InvertedFileIndex(Dim, metric, new InvertedFileOptions { ListCount = 32, SearchWidth = 2, Encoding = VectorEncoding.ProductCodes, ProductCodeBytes = 8, RescoreDepth = 30, MaxIterations = 8, Seed = 5, MaxDegreeOfParallelism = 1 }),
            _ => throw new ArgumentOutOfRangeException(nameof(kind), kind, "unknown kind"),
        };
        if (kind != "exact" && kind != "graph-float32")
        {
            index.Train(rows);
        }

        index.AddRange(ids, rows);
        return index;
    }

    private static long[] Ids(int count) => Enumerable.Range(0, count).Select(i => 3L * i).ToArray();

    private static float[] Row(int row) => Data.AsSpan(row * Dim, Dim).ToArray();

    // The index holds exactly the model's ids, each with its latest vector (as given; under cosine, of unit length).
    private static void AssertHoldsTheModel(IVectorIndex index, Live live)
    {
        Dictionary<long, float[]> model = live.Model;
        Assert.Equal(model.Count, index.Count);
        Assert.Equal(model.Keys.Order().ToArray(), index.GetIds());
        var vector = new float[Dim];
        foreach ((long id, float[] expected) in model)
        {
            Assert.True(index.TryGetVector(id, vector), $"item {id} is there");
            if (live.Metric == DistanceMetric.Cosine)
            {
                double norm = Math.Sqrt(expected.Sum(x => (double)x * x));
                for (int j = 0; j < Dim; j++)
                {
                    Assert.True(Math.Abs(vector[j] - (expected[j] / norm)) <= 1e-6, $"item {id}, component {j}: {vector[j]} against {expected[j] / norm}");
                }
            }
            else
            {
                Assert.Equal(expected, vector);
            }
        }
    }

    // Searches every query against the brute-force top k of the model: every hit is a live item at the distance of its
    // latest vector, hits are best first, and every segment item clearly inside the true top k is found. Returns recall@k.
    private static double CheckSearches(IVectorIndex index, Live live, out SearchHit[][] results)
    {
        results = new SearchHit[QueryCount][];
        int found = 0;
        for (int q = 0; q < QueryCount; q++)
        {
            float[] query = Row(BaseCount + NewCount + 300 + q);
            (double Distance, long Id)[] truth = [.. live.Model.Select(p => (Distance: Distance(live.Metric, query, p.Value), Id: p.Key)).OrderBy(t => t.Distance).ThenBy(t => t.Id).Take(K)];
            SearchHit[] hits = index.Search(query, K);
            results[q] = hits;
            Assert.Equal(K, hits.Length);
            Assert.Equal(K, hits.Select(h => h.Id).Distinct().Count());
            Assert.True(hits.SequenceEqual(hits.Order()), "hits are best first, ties by id");
            foreach (SearchHit hit in hits)
            {
                Assert.True(live.Model.TryGetValue(hit.Id, out float[]? vector), $"hit {hit.Id} is a live item");
                double distance = Distance(live.Metric, query, vector);
                Assert.True(Math.Abs(hit.Distance - distance) <= 1e-4 * Math.Max(1, distance), $"hit {hit.Id} at {hit.Distance}, its latest vector at {distance}");
            }

            // Segments are searched exactly: their items in the true top k are never missed (a margin keeps float ties out).
            double last = truth[^1].Distance;
            foreach ((double distance, long id) in truth)
            {
                if (live.SegmentIds.Contains(id) && distance < last - (1e-4 * Math.Max(1, last)))
                {
                    Assert.Contains(hits, h => h.Id == id);
                }
            }

            found += truth.Count(t => hits.Any(h => h.Id == t.Id));
        }

        return found / (double)(QueryCount * K);
    }

    // Squared L2, or 1 − cosine similarity, in double precision.
    private static double Distance(DistanceMetric metric, float[] a, float[] b)
    {
        double sum = 0, dot = 0, aa = 0, bb = 0;
        for (int i = 0; i < a.Length; i++)
        {
            double d = (double)a[i] - b[i];
            sum += d * d;
            dot += (double)a[i] * b[i];
            aa += (double)a[i] * a[i];
            bb += (double)b[i] * b[i];
        }

        return metric == DistanceMetric.Cosine ? 1 - (dot / Math.Sqrt(aa * bb)) : sum;
    }

    private sealed record Live(SegmentedIndex Index, Dictionary<long, float[]> Model, HashSet<long> SegmentIds) : IDisposable
    {
        public string BasePath { get; init; } = "";

        public Type BaseType { get; init; } = typeof(object);

        public DistanceMetric Metric { get; init; } = DistanceMetric.SquaredEuclidean;

        public void Dispose() => Index?.Dispose();
    }

    // Runs an action at the first report only.
    private sealed class ActionProgress(Action action) : IProgress<int>
    {
        private int _reports;

        public void Report(int value)
        {
            if (Interlocked.Increment(ref _reports) == 1)
            {
                action();
            }
        }
    }
}
