using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Tests.TestData;

namespace VectorKit.Tests.Indexes.Contract;

/// <summary>
/// The read-only part of the behaviour <see cref="IVectorIndex"/> promises (searches, batches, lookups, members, bad
/// search input, disposal), checked the same way on every index kind and encoding and on every form of an index that
/// only reads: <see cref="IndexContractTests"/> adds the writes for indexes that take them, and
/// <see cref="MappedContract{TVariant}"/> runs this part on a variant's index saved and opened mapped. Results are
/// compared with <see cref="NaiveIndex"/>, a double-precision exhaustive search that shares no code with the library.
/// </summary>
/// <remarks>
/// Variants that re-score from an external source get it from <see cref="SourceFor"/>; the write helpers of this class
/// (<see cref="AddRange"/>, <see cref="AddOrReplaceRange"/> and their single forms) put every vector into that source
/// before the index sees it, as a caller keeping its vectors elsewhere must, and put the old vectors back when the
/// index rejects or abandons the write. Tests therefore write through the helpers, never through the index directly.
/// </remarks>
public abstract partial class SearchContractTests
{
    /// <summary>The dimension of most cases (divisible by the product-code sizes the variants use).</summary>
    protected const int Dim = 16;

    /// <summary>Results asked for in the quality checks.</summary>
    protected const int K = 10;

    private readonly Dictionary<int, ContractSource> _sources = [];

    /// <summary>Every metric, for cases whose behaviour depends on it.</summary>
    public static TheoryData<DistanceMetric> Metrics => new() { DistanceMetric.SquaredEuclidean, DistanceMetric.InnerProduct, DistanceMetric.Cosine };

    /// <summary>Whether the variant returns exactly the true top k under default options.</summary>
    protected abstract bool IsExact { get; }

    /// <summary>
    /// The least mean recall@10 the variant must reach on the 2,000-item clustered set under <see cref="WideSearch"/>;
    /// each variant states where its floor comes from.
    /// </summary>
    protected abstract double RecallFloor { get; }

    /// <summary>Whether every distance returned is exact (float32 rows, or re-scored on full vectors).</summary>
    protected virtual bool ReportsExactDistances => true;

    /// <summary>
    /// Whether <see cref="IVectorIndex.TryGetVector"/> returns a decoded code (codes without full vectors) rather than the
    /// vector added; <see cref="AssertDecoded"/> then says what the decoded vector must be.
    /// </summary>
    protected virtual bool DecodesStoredVectors => false;

    /// <summary>Search options that make the variant search (nearly) everything: every list, or a very wide beam.</summary>
    protected virtual SearchOptions WideSearch => SearchOptions.Default;

    /// <summary>The options the last <see cref="Create"/> gave its index (set with <see cref="Given{T}"/>).</summary>
    protected VectorIndexOptions? GivenOptions { get; private set; }

    /// <summary>A ready, empty index: trained on <see cref="ContractData.TrainingSample"/> where the variant needs it.</summary>
    protected abstract IVectorIndex Create(int dimension, DistanceMetric metric);

    /// <summary>The documented <see cref="IVectorIndex.CodeBytesPerVector"/> of the variant.</summary>
    protected abstract int ExpectedCodeBytes(int dimension);

    /// <summary>Checks a vector read back from codes against the vector encoded (unit length under cosine).</summary>
    private protected virtual void AssertDecoded(IVectorIndex index, double[] encoded, float[] decoded)
        => throw new InvalidOperationException("a variant that decodes its stored vectors says how");

    /// <summary>An index of the variant holding <paramref name="ids"/> with their rows: by default a new one, filled.</summary>
    private protected virtual IVectorIndex Build(int dimension, DistanceMetric metric, long[] ids, float[] data)
    {
        IVectorIndex index = Create(dimension, metric);
        AddRange(index, ids, data);
        return index;
    }

    /// <summary>Checks that <paramref name="index"/> reports the options its factory gave (see <see cref="Given{T}"/>).</summary>
    private protected virtual void AssertOptions(IVectorIndex index) => Assert.Same(GivenOptions, index.Options);

    /// <summary>
    /// Whether <see cref="IVectorIndex.MemoryBytes"/> counts the stored rows (not for a mapped index, whose rows are the
    /// file's pages); <see langword="null"/> when some rows are mapped and some in memory (a segmented index), which
    /// bounds it neither way.
    /// </summary>
    private protected virtual bool? CountsStoredRows => true;

    /// <summary>Records the options a factory hands its index, for the <see cref="IVectorIndex.Options"/> check.</summary>
    protected T Given<T>(T options)
        where T : VectorIndexOptions
    {
        GivenOptions = options;
        return options;
    }

    /// <summary>The external source of this test for <paramref name="dimension"/>, kept in step with every write.</summary>
    protected IFullVectorSource SourceFor(int dimension)
    {
        if (!_sources.TryGetValue(dimension, out ContractSource? source))
        {
            source = new ContractSource(dimension);
            _sources.Add(dimension, source);
        }

        return source;
    }

    /// <summary>What a wrapper running this variant's read-only contract on another form of its index needs of it.</summary>
    internal (bool IsExact, double RecallFloor, bool ReportsExactDistances, bool DecodesStoredVectors, SearchOptions WideSearch) Facts
        => (IsExact, RecallFloor, ReportsExactDistances, DecodesStoredVectors, WideSearch);

    /// <summary>The options the variant's factory last gave, for a wrapper.</summary>
    internal VectorIndexOptions? LastGivenOptions => GivenOptions;

    /// <summary>A new empty index of the variant, for a wrapper.</summary>
    internal IVectorIndex NewIndex(int dimension, DistanceMetric metric) => Create(dimension, metric);

    /// <summary>A filled index of the variant (its source, if any, holding the rows), for a wrapper.</summary>
    internal IVectorIndex NewIndex(int dimension, DistanceMetric metric, long[] ids, float[] data) => Build(dimension, metric, ids, data);

    /// <summary>The variant's external source for <paramref name="dimension"/>, if it made one, for a wrapper.</summary>
    internal IFullVectorSource? ExistingSource(int dimension) => _sources.GetValueOrDefault(dimension);

    /// <summary>The variant's code bytes, for a wrapper.</summary>
    internal int CodeBytesOf(int dimension) => ExpectedCodeBytes(dimension);

    /// <summary>The variant's check of a decoded vector, for a wrapper.</summary>
    internal void CheckDecoded(IVectorIndex index, double[] encoded, float[] decoded) => AssertDecoded(index, encoded, decoded);

    protected void Add(IVectorIndex index, long id, float[] vector)
        => Write(index, [id], vector, () => { index.Add(id, vector); return 0; });

    protected void AddRange(IVectorIndex index, long[] ids, float[] vectors, IProgress<int>? progress = null, CancellationToken cancellationToken = default)
        => Write(index, ids, vectors, () => { index.AddRange(ids, vectors, progress, cancellationToken); return 0; });

    protected bool AddOrReplace(IVectorIndex index, long id, float[] vector)
        => Write(index, [id], vector, () => index.AddOrReplace(id, vector));

    protected int AddOrReplaceRange(IVectorIndex index, long[] ids, float[] vectors, IProgress<int>? progress = null, CancellationToken cancellationToken = default)
        => Write(index, ids, vectors, () => index.AddOrReplaceRange(ids, vectors, progress, cancellationToken));

    /// <summary>An index of <paramref name="count"/> clustered items and the reference holding the same items.</summary>
    private protected Filled Fill(DistanceMetric metric, int count, int dimension = Dim, int seed = 1)
    {
        long[] ids = ContractData.Ids(count);
        float[] data = ContractData.Rows(count, dimension, seed);
        IVectorIndex index = Build(dimension, metric, ids, data);
        var reference = new NaiveIndex(dimension, metric);
        for (int i = 0; i < count; i++)
        {
            reference.Add(ids[i], data.AsSpan(i * dimension, dimension));
        }

        return new Filled(index, ids, data, reference, metric);
    }

    /// <summary>Queries from the items' distribution but not among them.</summary>
    protected static float[] Queries(int count, int dimension = Dim, int seed = 99) => ContractData.Rows(count, dimension, seed);

    protected static float[] Row(float[] rows, int r, int dimension = Dim) => rows.AsSpan(r * dimension, dimension).ToArray();

    /// <summary>Ascending distance, ties by ascending id, no id twice.</summary>
    protected static void AssertBestFirst(ReadOnlySpan<SearchHit> hits)
    {
        var seen = new HashSet<long>();
        for (int i = 0; i < hits.Length; i++)
        {
            Assert.True(float.IsFinite(hits[i].Distance), $"hit {i} (id {hits[i].Id}) has distance {hits[i].Distance}");
            Assert.True(seen.Add(hits[i].Id), $"id {hits[i].Id} appears twice in one result");
            if (i > 0)
            {
                SearchHit a = hits[i - 1], b = hits[i];
                Assert.True(
                    a.Distance < b.Distance || (a.Distance == b.Distance && a.Id < b.Id),
                    $"hits {i - 1} ({a.Id}, {a.Distance}) and {i} ({b.Id}, {b.Distance}) are out of order");
            }
        }
    }

    /// <summary>
    /// Each hit's distance against a double-precision one: to the vector added (exact variants, re-scored ones), or to
    /// the vector the index says it stores (codes without full vectors, whose distances are to the decoded codes).
    /// </summary>
    private protected void AssertDistances(IVectorIndex index, float[] query, ReadOnlySpan<SearchHit> hits, Filled filled)
    {
        double[] q = Prepared(query, index.Metric);
        var stored = new float[index.Dimension];
        foreach (SearchHit hit in hits)
        {
            double[] x;
            if (ReportsExactDistances)
            {
                x = Prepared(filled.VectorOf(hit.Id), index.Metric);
            }
            else
            {
                Assert.True(index.TryGetVector(hit.Id, stored));
                x = stored.Select(v => (double)v).ToArray();
            }

            double expected = NaiveIndex.Distance(index.Metric, q, x);
            double tolerance = (ReportsExactDistances ? 2e-5 : 2e-4) * (1 + q.Sum(v => v * v) + x.Sum(v => v * v));
            Assert.True(
                Math.Abs(hit.Distance - expected) <= tolerance,
                $"id {hit.Id}: distance {hit.Distance}, reference {expected} (tolerance {tolerance})");
        }
    }

    /// <summary>The query as the reference measures it: in double, unit length under cosine.</summary>
    internal static double[] PreparedRow(ReadOnlySpan<float> vector, DistanceMetric metric) => Prepared(vector, metric);

    /// <summary>The query as the reference measures it: in double, unit length under cosine.</summary>
    protected static double[] Prepared(ReadOnlySpan<float> vector, DistanceMetric metric)
    {
        double[] v = new double[vector.Length];
        for (int i = 0; i < v.Length; i++)
        {
            v[i] = vector[i];
        }

        if (metric == DistanceMetric.Cosine)
        {
            double norm = Math.Sqrt(v.Sum(x => x * x));
            for (int i = 0; i < v.Length; i++)
            {
                v[i] /= norm;
            }
        }

        return v;
    }

    /// <summary>Every id with its stored vector, and a few searches: what "the index is unchanged" compares.</summary>
    protected static string Snapshot(IVectorIndex index, float[] queries)
    {
        var text = new System.Text.StringBuilder();
        text.Append(index.Count).Append(';');
        var vector = new float[index.Dimension];
        foreach (long id in index.GetIds())
        {
            Assert.True(index.TryGetVector(id, vector));
            text.Append(id).Append(':').AppendJoin(',', vector.Select(v => BitConverter.SingleToInt32Bits(v))).Append(';');
        }

        for (int r = 0; r < queries.Length / index.Dimension; r++)
        {
            foreach (SearchHit hit in index.Search(queries.AsSpan(r * index.Dimension, index.Dimension), K))
            {
                text.Append(hit.Id).Append('@').Append(BitConverter.SingleToInt32Bits(hit.Distance)).Append(' ');
            }

            text.Append(';');
        }

        return text.ToString();
    }

    private T Write<T>(IVectorIndex index, long[] ids, float[] vectors, Func<T> write)
    {
        List<(long, float[]?)>? previous = null;
        _sources.TryGetValue(index.Dimension, out ContractSource? source);
        if (source is not null && vectors.Length == ids.Length * index.Dimension)
        {
            previous = source.Put(ids, vectors);
        }

        try
        {
            return write();
        }
        catch
        {
            if (previous is not null)
            {
                source!.Restore(previous);
            }

            throw;
        }
    }

    /// <summary>A filled index, its items, and the reference over the same items.</summary>
    private protected sealed class Filled(IVectorIndex index, long[] ids, float[] data, NaiveIndex reference, DistanceMetric metric) : IDisposable
    {
        public IVectorIndex Index { get; } = index;

        public long[] Ids { get; } = ids;

        public float[] Data { get; } = data;

        public NaiveIndex Reference { get; } = reference;

        public DistanceMetric Metric { get; } = metric;

        public int Dimension => Index.Dimension;

        public float[] VectorOf(long id) => Row(Data, Array.IndexOf(Ids, id), Dimension);

        public void Dispose() => Index.Dispose();
    }
}
