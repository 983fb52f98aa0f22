using System.Numerics.Tensors;
using BenchmarkDotNet.Attributes;
using VectorKit.Distance;

namespace VectorKit.Benchmarks.Kernels;

/// <summary>
/// One query against <see cref="Rows"/> contiguous rows: <see cref="VectorDistance.ComputeMany"/> against a loop of one
/// TensorPrimitives call per row (the baseline). Times are per row (OperationsPerInvoke = rows).
/// </summary>
/// <remarks>
/// The rows take 0.5 MiB at d = 128 (L2) up to 6 MiB at d = 1536 (L3). The inner-product metric returns −dot, so
/// ours includes one negation pass over the results. TensorPrimitives has no squared Euclidean distance: its
/// <c>Distance</c> (one square root per row more) is the baseline for squared L2.
/// </remarks>
[KernelJob]
public class OneAgainstManyBenchmarks
{
    private const int Rows = 1024;

    private float[] _query = [];
    private float[] _rows = [];
    private float[] _results = [];

    [Params(128, 384, 768, 1536)]
    public int Dimension { get; set; }

    [GlobalSetup]
    public void Setup()
    {
        _query = TestData.Random(Dimension, seed: 3);
        _rows = TestData.Random(Rows * Dimension, seed: 4);
        _results = new float[Rows];
    }

    [BenchmarkCategory("Dot"), Benchmark(Baseline = true, OperationsPerInvoke = Rows)]
    public float TensorPrimitivesDotPerRow()
    {
        ReadOnlySpan<float> query = _query;
        for (int r = 0; r < Rows; r++)
        {
            _results[r] = TensorPrimitives.Dot(query, _rows.AsSpan(r * Dimension, Dimension));
        }

        return _results[Rows - 1];
    }

    [BenchmarkCategory("Dot"), Benchmark(OperationsPerInvoke = Rows)]
    public float VectorKitComputeManyInnerProduct()
    {
        VectorDistance.ComputeMany(DistanceMetric.InnerProduct, _query, _rows, _results);
        return _results[Rows - 1];
    }

    [BenchmarkCategory("SquaredL2"), Benchmark(Baseline = true, OperationsPerInvoke = Rows)]
    public float TensorPrimitivesDistancePerRow()
    {
        ReadOnlySpan<float> query = _query;
        for (int r = 0; r < Rows; r++)
        {
            _results[r] = TensorPrimitives.Distance(query, _rows.AsSpan(r * Dimension, Dimension));
        }

        return _results[Rows - 1];
    }

    [BenchmarkCategory("SquaredL2"), Benchmark(OperationsPerInvoke = Rows)]
    public float VectorKitComputeManySquaredEuclidean()
    {
        VectorDistance.ComputeMany(DistanceMetric.SquaredEuclidean, _query, _rows, _results);
        return _results[Rows - 1];
    }
}
