using BenchmarkDotNet.Attributes;
using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;

namespace VectorKit.Benchmarks.Indexes;

/// <summary>
/// A batch exact search: 10,000 queries against 60,000 stored vectors of 784 floats, top 10, squared L2, on one and on
/// two threads. Each operation is the whole batch (seconds), so the job is short: one warm-up, three measurements.
/// </summary>
/// <remarks>
/// Useful work is 10,000 × 60,000 × 784 = 4.70 × 10¹¹ multiply-adds per batch; dividing by time and threads and by the
/// single-thread peak measured in <see cref="Kernels.PeakFmaBenchmarks"/> gives the fraction of FMA peak reached.
/// Data: Fashion-MNIST training images as the base and test images as queries when present, else seeded random.
/// </remarks>
[SlowJob]
public class BatchSearchBenchmarks
{
    private const int BaseCount = 60_000;
    private const int QueryCount = 10_000;
    private const int K = 10;

    private ExactIndex? _index;
    private float[] _queries = [];

    [Params(1, 2)]
    public int MaxDegreeOfParallelism { get; set; }

    [GlobalSetup]
    public void Setup()
    {
        int d = TestData.ImageDimension;
        float[] train = TestData.Images(TestData.FashionTrainImages, BaseCount, seed: 7, out string trainSource);
        _queries = TestData.Images(TestData.FashionTestImages, QueryCount, seed: 8, out string testSource);
        Console.WriteLine($"// Base: {trainSource}; queries: {testSource}");
        var ids = new long[BaseCount];
        for (int i = 0; i < ids.Length; i++)
        {
            ids[i] = i;
        }

        _index = new ExactIndex(d, DistanceMetric.SquaredEuclidean, new ExactIndexOptions { InitialCapacity = BaseCount });
        _index.AddRange(ids, train);
    }

    [GlobalCleanup]
    public void Cleanup() => _index?.Dispose();

    [Benchmark]
    public float SearchBatchTop10()
    {
        BatchSearchResults results = _index!.SearchBatch(_queries, K, new SearchOptions { MaxDegreeOfParallelism = MaxDegreeOfParallelism });
        return results[QueryCount - 1][0].Distance;
    }
}
