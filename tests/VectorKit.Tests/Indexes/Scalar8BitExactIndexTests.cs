using FsCheck.Xunit;
using VectorKit.Distance;
using VectorKit.Distance.Kernels;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Quantization;
using VectorKit.Tests.Evaluation;
using Xunit;
using VectorKit.Internal;

namespace VectorKit.Tests.Indexes;

/// <summary>
/// The exact index under 8-bit storage, against independent references: a <see cref="ScalarQuantizer"/> trained on
/// the same sample (the public Train/Encode/Decode) with distances to the decoded codes summed in double, the
/// <see cref="NaiveIndex"/> oracle, and a float32 <see cref="ExactIndex"/> for re-scored distances. The class name ends
/// in ExactIndexTests so scripts/test.sh re-runs it on the narrower SIMD paths.
/// </summary>
public class Scalar8BitExactIndexTests
{
    // 2⁻²⁴, the unit roundoff of float32.
    private const double Unit = 1.0 / (1 << 24);

    public static TheoryData<DistanceMetric, int, int> MetricsPathsDimensions()
    {
        var data = new TheoryData<DistanceMetric, int, int>();
        foreach (DistanceMetric metric in Enum.GetValues<DistanceMetric>())
        {
            foreach (KernelPath path in Enum.GetValues<KernelPath>().Where(KernelDispatch.IsSupported))
            {
                foreach (int d in new[] { 1, 3, 16, 17, 64, 129 })
                {
                    data.Add(metric, (int)path, d);
                }
            }
        }

        return data;
    }

    [Theory]
    [MemberData(nameof(MetricsPathsDimensions))]
    public void Search_DistancesAreThoseToTheDecodedCodes_OnEveryKernelPath(DistanceMetric metric, int kernelPath, int dimension)
    {
        var random = new Random(500 + dimension);
        const int n = 257;
        float[] sample = ExactIndexTests.RandomFloats(random, 64 * dimension);
        float[] data = ExactIndexTests.RandomFloats(random, n * dimension);
        if (metric != DistanceMetric.Cosine)
        {
            // A grid where every sum is exact in float (see GridData): ids and distances must match the oracle exactly.
            sample = GridSample(dimension);
            data = GridData(random, n * dimension);
        }

        using ExactIndex index = Trained(dimension, metric, sample, path: (KernelPath)kernelPath);
        long[] ids = Enumerable.Range(0, n).Select(i => (long)((i * 7919) % 1009)).ToArray();
        index.AddRange(ids, data);
        var reference = new DecodedReference(dimension, metric, sample);
        reference.AddRange(ids, data);
        for (int t = 0; t < 12; t++)
        {
            float[] query = metric == DistanceMetric.Cosine ? ExactIndexTests.RandomFloats(random, dimension) : GridQuery(random, dimension);
            int k = 1 + random.Next(15);
            SearchHit[] hits = index.Search(query, k);
            reference.AssertTopK(query, k, hits, exact: metric != DistanceMetric.Cosine);
            Assert.Equal(hits, index.SearchBatch(query, k)[0].ToArray());
        }
    }

    [Theory]
    [MemberData(nameof(MetricsPathsDimensions))]
    public void RescoringEveryCandidate_GivesTheFloat32IndexResults_BitForBit(DistanceMetric metric, int kernelPath, int dimension)
    {
        var random = new Random(900 + dimension);
        const int n = 203;
        float[] data = ExactIndexTests.RandomFloats(random, n * dimension);
        long[] ids = Enumerable.Range(0, n).Select(i => (long)i * 3).ToArray();
        using ExactIndex codes = Trained(dimension, metric, data, rescoreDepth: n, path: (KernelPath)kernelPath);
        using var exact = new ExactIndex(dimension, metric, null, (KernelPath)kernelPath);
        codes.AddRange(ids, data);
        exact.AddRange(ids, data);
        for (int t = 0; t < 10; t++)
        {
            float[] query = ExactIndexTests.RandomFloats(random, dimension);
            int k = 1 + random.Next(20);
            Assert.Equal(exact.Search(query, k), codes.Search(query, k));
            var filter = new SearchOptions { Filter = id => id % 2 == 0 };
            Assert.Equal(exact.Search(query, k, filter), codes.Search(query, k, filter));
        }
    }

    [Property(MaxTest = 150)]
    public void Distances_EqualTheDoubleDistanceToTheDecodedCode_AndResultsAreTheTopK(int[] components, byte dimensionSeed, byte metricSeed, byte kSeed, int seed, bool filtered)
    {
        // Real-valued data, trained on part of it (the rest may fall outside the ranges and be clamped). Each distance
        // is checked against the double-precision distance to ScalarQuantizer.Decode(code) within 2·(d + 8)·2⁻²⁴·Σ|terms|
        // + 2⁻²³ (the float sum's error bound, Higham ch. 3, with room); no left-out item may beat a returned one by
        // more than that; order is by the returned distance, ties by id.
        DistanceMetric metric = (DistanceMetric)(metricSeed % 3);
        int d = 1 + (dimensionSeed % 20);
        int n = Math.Min(components.Length, 90);
        var random = new Random(seed);
        float[] data = components.Take(n).SelectMany(c => Enumerable.Range(0, d).Select(j => (float)(((c * 31) + (j * 17) + random.Next(100)) % 200) / 37f)).ToArray();
        if (metric == DistanceMetric.Cosine)
        {
            Patch(data, d);
        }

        float[] sample = data.Length > 0 ? data.AsSpan(0, Math.Max(d, data.Length / 2 / d * d)).ToArray() : Enumerable.Repeat(1f, d).ToArray();
        long[] ids = Enumerable.Range(0, n).Select(i => (long)((i * 37) % 101) - 50 + (101 * (i / 101))).ToArray();
        using ExactIndex index = Trained(d, metric, sample);
        var reference = new DecodedReference(d, metric, sample);
        index.AddRange(ids, data);
        reference.AddRange(ids, data);
        int k = 1 + (kSeed % 12);
        float[] query = Enumerable.Range(0, d).Select(_ => (float)((random.NextDouble() * 6) - 1)).ToArray();
        query[0] = query[0] == 0 ? 1 : query[0];
        var options = new SearchOptions { Filter = filtered ? id => (id & 1) == 0 : null };
        SearchHit[] hits = index.Search(query, k, options);
        reference.AssertTopK(query, k, hits, exact: false, options.Filter);
        Assert.Equal(hits, index.SearchBatch(query, k, options)[0].ToArray());
    }

    [Property(MaxTest = 150)]
    public void OnAGridWithExactSums_ResultsAreExactlyTheTopK_TiesById(int[] components, byte dimensionSeed, byte kSeed, bool innerProduct, int seed)
    {
        DistanceMetric metric = innerProduct ? DistanceMetric.InnerProduct : DistanceMetric.SquaredEuclidean;
        int d = 1 + (dimensionSeed % 9);
        int n = components.Length / d;
        var random = new Random(seed);
        float[] data = components.Take(n * d).Select(c => (Math.Abs(c % 600) / 4f) - 10f).ToArray();
        long[] ids = Enumerable.Range(0, n).Select(i => (long)((i * 37) % 101) - 50 + (101 * (i / 101))).ToArray();
        using ExactIndex index = Trained(d, metric, GridSample(d));
        var reference = new DecodedReference(d, metric, GridSample(d));
        index.AddRange(ids, data);
        reference.AddRange(ids, data);
        int k = 1 + (kSeed % 12);
        float[] query = GridQuery(random, d);
        reference.AssertTopK(query, k, index.Search(query, k), exact: true);
    }

    [Property(MaxTest = 120)]
    public void RescoredDistances_EqualTheFloat32ExactIndex_BitForBit(int[] components, byte dimensionSeed, byte metricSeed, byte depthSeed, byte kSeed, int seed)
    {
        DistanceMetric metric = (DistanceMetric)(metricSeed % 3);
        int d = 1 + (dimensionSeed % 24);
        int n = Math.Min(components.Length, 80);
        var random = new Random(seed);
        float[] data = components.Take(n).SelectMany(c => Enumerable.Range(0, d).Select(j => (float)((((long)c * (j + 3)) % 1000) + random.Next(7)) / 91f)).ToArray();
        if (metric == DistanceMetric.Cosine)
        {
            Patch(data, d);
        }

        long[] ids = Enumerable.Range(0, n).Select(i => (long)i * 11).ToArray();
        int depth = 1 + (depthSeed % (n + 4));
        int k = 1 + (kSeed % 10);
        using ExactIndex codes = Trained(d, metric, n > 0 ? data : Enumerable.Repeat(1f, d).ToArray(), rescoreDepth: depth);
        using var exact = new ExactIndex(d, metric);
        codes.AddRange(ids, data);
        exact.AddRange(ids, data);
        float[] query = Enumerable.Range(0, d).Select(_ => (float)((random.NextDouble() * 20) - 5)).ToArray();
        query[0] = query[0] == 0 ? 1 : query[0];
        Dictionary<long, float> exactDistance = exact.Search(query, Math.Max(1, n)).ToDictionary(h => h.Id, h => h.Distance);

        // The re-scored answer: the best `depth` candidates by code distance, ranked by their exact distances.
        SearchHit[] rescored = codes.Search(query, k);
        SearchHit[] candidates = codes.Search(query, Math.Max(k, depth), new SearchOptions { RescoreDepth = 0 });
        SearchHit[] expected = candidates.Select(h => new SearchHit(h.Id, exactDistance[h.Id])).Order().Take(k).ToArray();
        Assert.Equal(expected, rescored);
        Assert.Equal(rescored, codes.SearchBatch(query, k)[0].ToArray());
        if (depth >= n)
        {
            Assert.Equal(exact.Search(query, k), rescored);
        }
    }

    [Property(MaxTest = 150)]
    public void RandomAddRemoveSequences_AgreeWithANaiveModelOfTheDecodedVectors(int[] operations, int querySeed, bool keepFullVectors)
    {
        const int d = 3;
        using ExactIndex index = Trained(d, DistanceMetric.SquaredEuclidean, GridSample(d), rescoreDepth: keepFullVectors ? 4 : 0);
        var reference = new DecodedReference(d, DistanceMetric.SquaredEuclidean, GridSample(d));
        var originals = new Dictionary<long, float[]>();
        var live = new List<long>();
        foreach (int op in operations)
        {
            long id = Math.Abs(op % 23);
            float[] vector = [((op % 5) * 30.3f) - 5, ((op / 5) % 5) * 20.25f, ((op / 25) % 5) * 41.1f];
            if (op % 3 == 0 && live.Count > 0)
            {
                long victim = live[Math.Abs(op) % live.Count];
                index.Remove(victim);
                reference.Remove(victim);
                originals.Remove(victim);
                live.Remove(victim);
            }
            else if (reference.Contains(id))
            {
                Assert.Throws<ArgumentException>(() => index.Add(id, vector));
            }
            else
            {
                index.Add(id, vector);
                reference.Add(id, vector);
                originals.Add(id, vector);
                live.Add(id);
            }

            Assert.Equal(reference.Count, index.Count);
        }

        var row = new float[d];
        foreach (long id in live)
        {
            Assert.True(index.TryGetVector(id, row));
            Assert.Equal(keepFullVectors ? originals[id] : reference.Decoded(id), row);
        }

        Assert.Equal(live.Order(), index.GetIds());
        var random = new Random(querySeed);
        float[] query = GridQuery(random, d);
        reference.AssertTopK(query, 5, index.Search(query, 5, new SearchOptions { RescoreDepth = 0 }), exact: true);
    }

    [Fact]
    public void Float32Storage_IsTrainedFromTheStart_AndTrainOnlyValidates()
    {
        using var index = new ExactIndex(3, DistanceMetric.Cosine);
        Assert.True(index.IsTrained);
        Assert.Equal((VectorEncoding.Float32, 0, false), (index.Options.Encoding, index.Options.RescoreDepth, index.KeepsFullVectors));
        index.Add(1, [1, 2, 3]);
        var progress = new SynchronousProgress<IndexTrainingProgress>();
        index.Train([1, 0, 0, 0, 1, 0], progress);
        Assert.Empty(progress.Values);
        Assert.Contains("sample row 1 has a non-finite component", Assert.Throws<ArgumentException>(() => index.Train([1, 0, 0, 0, float.NaN, 0])).Message, StringComparison.Ordinal);
        Assert.Equal("sample row 1", Assert.Throws<ArgumentException>(() => index.Train([1, 0, 0, 0, 0, 0])).ParamName);
        Assert.Equal(1, index.Count);
    }

    [Fact]
    public void BeforeTraining_AddsAndSearchesThrow_NamingWhatToCall()
    {
        using var index = new ExactIndex(4, DistanceMetric.SquaredEuclidean, new ExactIndexOptions { Encoding = VectorEncoding.Scalar8Bit });
        Assert.False(index.IsTrained);
        string message = Assert.Throws<IndexNotTrainedException>(() => index.Add(1, [1, 2, 3, 4])).Message;
        Assert.Contains("call Train with a sample of at least 1 vector", message, StringComparison.Ordinal);
        Assert.Throws<IndexNotTrainedException>(() => index.AddRange([1, 2], new float[8]));
        Assert.Throws<IndexNotTrainedException>(() => index.Search([1, 2, 3, 4], 3));
        Assert.Throws<IndexNotTrainedException>(() => index.SearchBatch(new float[8], 3));
        Assert.Equal(0, index.SearchBatch(ReadOnlySpan<float>.Empty, 3).QueryCount);
        Assert.Equal(0, index.Count);
        Assert.False(index.TryGetVector(1, new float[4]));
    }

    [Fact]
    public void TrainingAfterAdds_IsRefused_AndTheIndexIsUnchanged()
    {
        float[] sample = [0, 0, 0, 4, 4, 4];
        using ExactIndex index = Trained(3, DistanceMetric.SquaredEuclidean, sample);
        index.AddRange([1, 2], [1, 1, 1, 3, 3, 3]);
        SearchHit[] before = index.Search([1, 1, 1], 2);
        var e = Assert.Throws<InvalidOperationException>(() => index.Train([0, 0, 0, 100, 100, 100]));
        Assert.Equal("The index holds 2 vectors, whose 8-bit codes depend on the current ranges; train before adding, or build a new index.", e.Message);
        Assert.Equal(before, index.Search([1, 1, 1], 2));

        // Once empty again it may be retrained.
        index.Remove(1);
        index.Remove(2);
        index.Train([0, 0, 0, 100, 100, 100]);
        index.Add(3, [50, 50, 50]);
        Assert.Equal(3, index.Search([50, 50, 50], 1)[0].Id);
    }

    [Fact]
    public void BadSamples_AreRejectedWithClearMessages_AndLeaveTheIndexUntrained()
    {
        using var index = new ExactIndex(3, DistanceMetric.Cosine, new ExactIndexOptions { Encoding = VectorEncoding.Scalar8Bit, RescoreDepth = 4 });
        var empty = Assert.Throws<ArgumentException>(() => index.Train([]));
        Assert.Equal("sample", empty.ParamName);
        Assert.Contains("sample has 0 components; training needs at least 1 row and a multiple of the index dimension 3.", empty.Message, StringComparison.Ordinal);
        Assert.Contains("sample has 4 components", Assert.Throws<ArgumentException>(() => index.Train([1, 2, 3, 4])).Message, StringComparison.Ordinal);
        Assert.Contains("sample row 1 has a non-finite component: [2] = NaN", Assert.Throws<ArgumentException>(() => index.Train([1, 2, 3, 4, 5, float.NaN])).Message, StringComparison.Ordinal);
        Assert.Contains("sample row 1", Assert.Throws<ArgumentException>(() => index.Train([1, 2, 3, 0, 0, 0])).ParamName, StringComparison.Ordinal);

        var cancelled = new CancellationTokenSource();
        cancelled.Cancel();
        Assert.Throws<OperationCanceledException>(() => index.Train([1, 2, 3], null, cancelled.Token));
        Assert.False(index.IsTrained);

        var progress = new SynchronousProgress<IndexTrainingProgress>();
        index.Train([1, 2, 3, -1, 0.5f, 2], progress);
        Assert.True(index.IsTrained);
        Assert.Equal([new IndexTrainingProgress(IndexTrainingStage.TrainingQuantizer, 1, 1)], progress.Values);
    }

    [Fact]
    public void AfterTraining_DimensionMismatchAndNaN_AreRejected_AndNothingIsAdded()
    {
        using ExactIndex index = Trained(3, DistanceMetric.InnerProduct, [0, 0, 0, 1, 1, 1]);
        index.Add(1, [0.5f, 0.5f, 0.5f]);
        Assert.Contains("vector has 2 components; the index dimension is 3", Assert.Throws<ArgumentException>(() => index.Add(2, [1, 2])).Message, StringComparison.Ordinal);
        Assert.Throws<ArgumentException>(() => index.AddRange([2, 3], [1, 1, 1, 1, float.NaN, 1]));
        Assert.Throws<ArgumentException>(() => index.Search([1, 2], 1));
        Assert.Throws<ArgumentException>(() => index.Search([1, float.PositiveInfinity, 2], 1));
        Assert.Equal(1, index.Count);
        Assert.False(index.Contains(2));
    }

    [Fact]
    public void Options_RejectUndefinedStorageAndNegativeDepth_NamingTheOption()
    {
        Assert.Equal("Encoding", Assert.Throws<ArgumentOutOfRangeException>(() => new ExactIndexOptions { Encoding = (VectorEncoding)7 }).ParamName);
        Assert.Equal("RescoreDepth", Assert.Throws<ArgumentOutOfRangeException>(() => new ExactIndexOptions { RescoreDepth = -1 }).ParamName);
        Assert.Equal((VectorEncoding.Float32, 0), (ExactIndexOptions.Default.Encoding, ExactIndexOptions.Default.RescoreDepth));
    }

    [Theory]
    [InlineData(false)]
    [InlineData(true)]
    public void MemoryBytes_CountsCodes_AndFullVectorsOnlyWhenKept(bool keep)
    {
        const int d = 128, n = 1000;
        float[] data = ExactIndexTests.RandomFloats(new Random(3), n * d);
        long[] ids = Enumerable.Range(0, n).Select(i => (long)i).ToArray();
        using ExactIndex codes = Trained(d, DistanceMetric.SquaredEuclidean, data, rescoreDepth: keep ? 10 : 0);
        using var exact = new ExactIndex(d, DistanceMetric.SquaredEuclidean);
        codes.AddRange(ids, data);
        exact.AddRange(ids, data);
        codes.Compact();
        exact.Compact();
        long floatRows = (long)n * d * sizeof(float);
        long codeRows = (long)n * d;
        long overhead = exact.MemoryBytes - floatRows;
        Assert.Equal(keep, codes.KeepsFullVectors);

        // The float32 index minus its norms, plus the codes and the two range arrays, minus the rows when not kept.
        long expected = overhead - (n * sizeof(float)) + codeRows + (2 * d * sizeof(float)) + (keep ? floatRows : 0);
        Assert.Equal(expected, codes.MemoryBytes);
    }

    [Fact]
    public void TryGetVector_WithoutFullVectors_IsTheDecodedCode()
    {
        float[] sample = [-1, 0, 2, 3, 1, 5];
        using ExactIndex index = Trained(3, DistanceMetric.SquaredEuclidean, sample);
        var reference = ScalarQuantizer.Train(sample, 3);
        float[] vector = [0.3f, 0.77f, 9];
        index.Add(7, vector);
        var code = new byte[reference.CodeBytes];
        reference.Encode(vector, code);
        var decoded = new float[3];
        reference.Decode(code, decoded);
        var got = new float[3];
        Assert.True(index.TryGetVector(7, got));
        Assert.Equal(decoded, got);
        Assert.Equal(5f, got[2], 1e-5f);
    }

    [Theory]
    [InlineData(DistanceMetric.SquaredEuclidean, 0)]
    [InlineData(DistanceMetric.InnerProduct, 30)]
    [InlineData(DistanceMetric.Cosine, 0)]
    [InlineData(DistanceMetric.Cosine, 30)]
    public void BatchSearch_ReturnsWhatSingleSearchesReturn_WithFilterAndProgress(DistanceMetric metric, int depth)
    {
        var random = new Random(11);
        const int d = 40, n = 1500, queries = 70, k = 9;
        float[] data = ExactIndexTests.RandomFloats(random, n * d);
        using ExactIndex index = Trained(d, metric, data, rescoreDepth: depth);
        index.AddRange(Enumerable.Range(0, n).Select(i => (long)i).ToArray(), data);
        float[] q = ExactIndexTests.RandomFloats(random, queries * d);
        foreach (SearchOptions options in new[] { SearchOptions.Default, new SearchOptions { Filter = id => id % 3 != 0, MaxDegreeOfParallelism = 2 }, new SearchOptions { RescoreDepth = 5 } })
        {
            var progress = new SynchronousProgress<int>();
            BatchSearchResults batch = index.SearchBatch(q, k, options, progress);
            Assert.Equal(queries, progress.Values.Max());
            for (int i = 0; i < queries; i++)
            {
                Assert.Equal(index.Search(q.AsSpan(i * d, d), k, options), batch[i].ToArray());
            }
        }

        using var cancel = new CancellationTokenSource();
        cancel.Cancel();
        Assert.ThrowsAny<OperationCanceledException>(() => index.SearchBatch(q, k, null, null, cancel.Token));
    }

    [Fact]
    public void ITrainableIndex_GenericTraining_Works()
    {
        using var exact = new ExactIndex(2, DistanceMetric.SquaredEuclidean, new ExactIndexOptions { Encoding = VectorEncoding.Scalar8Bit });
        IVectorIndex index = exact;
        if (index is ITrainableIndex { IsTrained: false } trainable)
        {
            trainable.Train([0, 0, 10, 10]);
        }

        index.Add(1, [5, 5]);
        Assert.Equal(1, index.Search([5, 5], 1)[0].Id);
    }

    internal static ExactIndex Trained(int d, DistanceMetric metric, ReadOnlySpan<float> sample, int rescoreDepth = 0, KernelPath? path = null)
    {
        var index = new ExactIndex(d, metric, new ExactIndexOptions { Encoding = VectorEncoding.Scalar8Bit, RescoreDepth = rescoreDepth }, path ?? KernelDispatch.Widest);
        index.Train(sample);
        return index;
    }

    // Two rows, all 0 and all 127.5: every range is [0, 127.5] with a step of exactly 0.5.
    private static float[] GridSample(int d) => [.. Enumerable.Repeat(0f, d), .. Enumerable.Repeat(127.5f, d)];

    // Multiples of 0.25 in [−10, 140): some round half-way, some are clamped. Decoded values are multiples of 0.5 and
    // queries are too, so every product and sum the kernel forms is exact in float.
    private static float[] GridData(Random random, int length) => Enumerable.Range(0, length).Select(_ => (random.Next(600) / 4f) - 10f).ToArray();

    private static float[] GridQuery(Random random, int d) => Enumerable.Range(0, d).Select(_ => (random.Next(270) / 2f) - 5f).ToArray();

    // Cosine rejects zero rows: give any a direction.
    private static void Patch(float[] data, int d)
    {
        for (int r = 0; r < data.Length / d; r++)
        {
            if (data.AsSpan(r * d, d).IndexOfAnyExcept(0f) < 0)
            {
                data[r * d] = 1;
            }
        }
    }

    /// <summary>
    /// The reference: a quantizer trained by the public API on the same sample (rows scaled to unit length under cosine,
    /// as the index stores them), each added vector encoded and decoded by it, distances summed in double.
    /// </summary>
    private sealed class DecodedReference
    {
        private readonly int _d;
        private readonly DistanceMetric _metric;
        private readonly ScalarQuantizer _quantizer;
        private readonly Dictionary<long, float[]> _decoded = new();

        public DecodedReference(int d, DistanceMetric metric, ReadOnlySpan<float> sample)
        {
            _d = d;
            _metric = metric;
            _quantizer = ScalarQuantizer.Train(AsStored(sample), d);
        }

        public int Count => _decoded.Count;

        public bool Contains(long id) => _decoded.ContainsKey(id);

        public float[] Decoded(long id) => _decoded[id];

        public void Remove(long id) => _decoded.Remove(id);

        public void AddRange(long[] ids, float[] rows)
        {
            for (int i = 0; i < ids.Length; i++)
            {
                Add(ids[i], rows.AsSpan(i * _d, _d));
            }
        }

        public void Add(long id, ReadOnlySpan<float> vector)
        {
            var code = new byte[_quantizer.CodeBytes];
            _quantizer.Encode(AsStored(vector), code);
            var decoded = new float[_d];
            _quantizer.Decode(code, decoded);
            _decoded.Add(id, decoded);
        }

        /// <summary>
        /// Checks hits against the reference: each distance within the float bound (or exact), the order by distance
        /// then id, the count, and no left-out item better than a returned one (beyond the bound).
        /// </summary>
        public void AssertTopK(float[] query, int k, SearchHit[] hits, bool exact, Func<long, bool>? filter = null)
        {
            float[] q = AsStored(query);
            var all = _decoded.Where(p => filter is null || filter(p.Key)).Select(p => (Id: p.Key, Distance: Distance(q, p.Value), Tolerance: exact ? 0 : Tolerance(q, p.Value))).ToList();
            Assert.Equal(Math.Min(k, all.Count), hits.Length);
            Dictionary<long, (long Id, double Distance, double Tolerance)> byId = all.ToDictionary(a => a.Id);
            for (int i = 0; i < hits.Length; i++)
            {
                var (_, distance, tolerance) = byId[hits[i].Id];
                Assert.True(Math.Abs(hits[i].Distance - distance) <= tolerance, $"hit {i} (id {hits[i].Id}): {hits[i].Distance} vs the reference {distance} (tolerance {tolerance})");
                if (i > 0)
                {
                    Assert.True(hits[i - 1].CompareTo(hits[i]) < 0, "hits must be ordered by distance, ties by ascending id");
                }
            }

            if (exact)
            {
                var expected = all.OrderBy(a => a.Distance).ThenBy(a => a.Id).Take(k).Select(a => new SearchHit(a.Id, (float)a.Distance));
                Assert.Equal(expected, hits);
                return;
            }

            var returned = hits.Select(h => h.Id).ToHashSet();
            double worstReturned = hits.Length == 0 ? double.NegativeInfinity : hits.Max(h => byId[h.Id].Distance - byId[h.Id].Tolerance);
            foreach (var left in all.Where(a => !returned.Contains(a.Id)))
            {
                Assert.True(left.Distance + left.Tolerance >= worstReturned, $"id {left.Id} at {left.Distance} was left out, but a returned hit is at {worstReturned}");
            }
        }

        private float[] AsStored(ReadOnlySpan<float> rows)
        {
            float[] copy = rows.ToArray();
            if (_metric == DistanceMetric.Cosine)
            {
                for (int r = 0; r < rows.Length / _d; r++)
                {
                    VectorChecks.Normalize(rows.Slice(r * _d, _d), copy.AsSpan(r * _d, _d), "rows");
                }
            }

            return copy;
        }

        private double Distance(float[] q, float[] x)
        {
            double sum = 0;
            for (int i = 0; i < _d; i++)
            {
                sum += _metric == DistanceMetric.SquaredEuclidean ? ((double)q[i] - x[i]) * ((double)q[i] - x[i]) : (double)q[i] * x[i];
            }

            return _metric switch
            {
                DistanceMetric.SquaredEuclidean => sum,
                DistanceMetric.InnerProduct => -sum,
                _ => 1 - sum,
            };
        }

        private double Tolerance(float[] q, float[] x)
        {
            double magnitude = 0;
            for (int i = 0; i < _d; i++)
            {
                magnitude += _metric == DistanceMetric.SquaredEuclidean ? ((double)q[i] - x[i]) * ((double)q[i] - x[i]) : Math.Abs((double)q[i] * x[i]);
            }

            return (2 * (_d + 8) * Unit * magnitude) + (2 * Unit);
        }
    }
}
