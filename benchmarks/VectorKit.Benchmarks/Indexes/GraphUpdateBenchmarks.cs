using BenchmarkDotNet.Attributes;
using VectorKit.Distance;
using VectorKit.Indexes.Graph;
using VectorKit.Tests.TestData;

namespace VectorKit.Benchmarks.Indexes;

/// <summary>
/// The cost of one live change on a built graph: remove an item and add it back, at two index sizes ten times apart.
/// Local repair should make the cost nearly independent of the size; the second method adds the global reachability
/// pass to every change (what each change cost before repair was local), to show what the amortisation saves.
/// The amortised pass (due every Count/8 changes) is inside the measured average of the first method, as it would be
/// in a service.
/// </summary>
[KernelJob]
public class GraphUpdateBenchmarks
{
    private const int Dimension = 128;
    private GraphIndex _graph = null!;
    private float[] _data = [];
    private int _next;

    [Params(20_000, 200_000)]
    public int Items { get; set; }

    [GlobalSetup]
    public void Build()
    {
        _data = ClusteredData.Generate(Items, Dimension, Items / 100, 0.2f, seed: 101);
        _graph = new GraphIndex(Dimension, DistanceMetric.SquaredEuclidean, new GraphIndexOptions { MaxDegreeOfParallelism = 2 });
        _graph.AddRange(Enumerable.Range(0, Items).Select(i => (long)i).ToArray(), _data);
    }

    [GlobalCleanup]
    public void Release() => _graph.Dispose();

    [Benchmark(Baseline = true, Description = "remove + add (local repair)")]
    public void RemoveThenAdd()
    {
        // A stride coprime with the size visits items all over the index, not one cluster after another.
        int id = _next;
        _next = (_next + 7919) % Items;
        _graph.Remove(id);
        _graph.Add(id, _data.AsSpan(id * Dimension, Dimension));
    }

    [Benchmark(Description = "remove + add + global pass")]
    public void RemoveThenAddWithGlobalPass()
    {
        RemoveThenAdd();
        _graph.RunFullPass();
    }
}
