using System.Numerics.Tensors;
using BenchmarkDotNet.Attributes;
using VectorKit.Distance;

namespace VectorKit.Benchmarks.Kernels;

/// <summary>
/// One query against many contiguous rows: <see cref="VectorDistance.ComputeMany"/> against a loop of one
/// TensorPrimitives call per row (the baseline). Times are per row (OperationsPerInvoke = rows).
/// </summary>
/// <remarks>
/// <para>Each invocation scores 1,024 rows: <see cref="DistinctRows"/> = 1024 distinct rows once (0.5 MiB at d = 128,
/// in L2; 1.5 to 6 MiB at d ≥ 384, in L3), or 128 distinct rows eight times (at most 768 KiB, in L2 at every d).</para>
/// <para>The inner-product metric returns −dot, so ours includes one negation pass over the results. TensorPrimitives
/// has no squared Euclidean distance: its <c>Distance</c> (one square root per row more) is the baseline for squared L2.</para>
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

    [Params(128, 1024)]
    public int DistinctRows { get; set; }

    [GlobalSetup]
    public void Setup()
    {
        _query = TestData.Random(Dimension, seed: 3);
        _rows = TestData.Random(DistinctRows * Dimension, seed: 4);
        _results = new float[DistinctRows];
    }

    [BenchmarkCategory("Dot"), Benchmark(Baseline = true, OperationsPerInvoke = Rows)]
    public float TensorPrimitivesDotPerRow()
    {
        ReadOnlySpan<float> query = _query;
        for (int pass = 0; pass < Rows / DistinctRows; pass++)
        {
            for (int r = 0; r < DistinctRows; r++)
            {
                _results[r] = TensorPrimitives.Dot(query, _rows.AsSpan(r * Dimension, Dimension));
            }
        }

        return _results[0];
    }

    [BenchmarkCategory("Dot"), Benchmark(OperationsPerInvoke = Rows)]
    public float VectorKitComputeManyInnerProduct()
    {
        for (int pass = 0; pass < Rows / DistinctRows; pass++)
        {
            VectorDistance.ComputeMany(DistanceMetric.InnerProduct, _query, _rows, _results);
        }

        return _results[0];
    }

    [BenchmarkCategory("SquaredL2"), Benchmark(Baseline = true, OperationsPerInvoke = Rows)]
    public float TensorPrimitivesDistancePerRow()
    {
        ReadOnlySpan<float> query = _query;
        for (int pass = 0; pass < Rows / DistinctRows; pass++)
        {
            for (int r = 0; r < DistinctRows; r++)
            {
                _results[r] = TensorPrimitives.Distance(query, _rows.AsSpan(r * Dimension, Dimension));
            }
        }

        return _results[0];
    }

    [BenchmarkCategory("SquaredL2"), Benchmark(OperationsPerInvoke = Rows)]
    public float VectorKitComputeManySquaredEuclidean()
    {
        for (int pass = 0; pass < Rows / DistinctRows; pass++)
        {
            VectorDistance.ComputeMany(DistanceMetric.SquaredEuclidean, _query, _rows, _results);
        }

        return _results[0];
    }
}
