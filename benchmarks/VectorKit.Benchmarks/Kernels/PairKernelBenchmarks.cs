using System.Numerics.Tensors;
using BenchmarkDotNet.Attributes;
using VectorKit.Distance;

namespace VectorKit.Benchmarks.Kernels;

/// <summary>
/// One pair of vectors at a time: VectorKit's pair kernels against System.Numerics.Tensors' TensorPrimitives
/// (the baseline of each category). Times are per pair.
/// </summary>
/// <remarks>
/// <para>Each invocation scores <see cref="Pairs"/> pairs drawn from pools of at most 128 KiB per side, so the data sits
/// in L2 and the harness overhead is spread over many calls. Both sides see exactly the same pairs.</para>
/// <para>TensorPrimitives has no squared Euclidean distance; its <c>Distance</c> is the square root of it. The
/// "SquaredL2" category therefore compares <c>Distance</c> with <c>MathF.Sqrt(SquaredEuclidean)</c> (same result),
/// and also shows our squared distance alone.</para>
/// </remarks>
[KernelJob]
public class PairKernelBenchmarks
{
    private const int Pairs = 256;
    private const int PoolFloats = 32 * 1024;

    private float[] _x = [];
    private float[] _y = [];
    private int _pool;

    [Params(32, 64, 128, 384, 768, 1536)]
    public int Dimension { get; set; }

    [GlobalSetup]
    public void Setup()
    {
        _pool = Math.Max(8, PoolFloats / Dimension);
        _x = TestData.Random(_pool * Dimension, seed: 1);
        _y = TestData.Random(_pool * Dimension, seed: 2);
    }

    [BenchmarkCategory("Dot"), Benchmark(Baseline = true, OperationsPerInvoke = Pairs)]
    public float TensorPrimitivesDot()
    {
        float total = 0;
        for (int p = 0; p < Pairs; p++)
        {
            total += TensorPrimitives.Dot(X(p), Y(p));
        }

        return total;
    }

    [BenchmarkCategory("Dot"), Benchmark(OperationsPerInvoke = Pairs)]
    public float VectorKitDot()
    {
        float total = 0;
        for (int p = 0; p < Pairs; p++)
        {
            total += VectorDistance.Dot(X(p), Y(p));
        }

        return total;
    }

    [BenchmarkCategory("SquaredL2"), Benchmark(Baseline = true, OperationsPerInvoke = Pairs)]
    public float TensorPrimitivesDistance()
    {
        float total = 0;
        for (int p = 0; p < Pairs; p++)
        {
            total += TensorPrimitives.Distance(X(p), Y(p));
        }

        return total;
    }

    [BenchmarkCategory("SquaredL2"), Benchmark(OperationsPerInvoke = Pairs)]
    public float VectorKitSqrtOfSquaredEuclidean()
    {
        float total = 0;
        for (int p = 0; p < Pairs; p++)
        {
            total += MathF.Sqrt(VectorDistance.SquaredEuclidean(X(p), Y(p)));
        }

        return total;
    }

    [BenchmarkCategory("SquaredL2"), Benchmark(OperationsPerInvoke = Pairs)]
    public float VectorKitSquaredEuclidean()
    {
        float total = 0;
        for (int p = 0; p < Pairs; p++)
        {
            total += VectorDistance.SquaredEuclidean(X(p), Y(p));
        }

        return total;
    }

    [BenchmarkCategory("Cosine"), Benchmark(Baseline = true, OperationsPerInvoke = Pairs)]
    public float TensorPrimitivesCosine()
    {
        float total = 0;
        for (int p = 0; p < Pairs; p++)
        {
            total += TensorPrimitives.CosineSimilarity(X(p), Y(p));
        }

        return total;
    }

    [BenchmarkCategory("Cosine"), Benchmark(OperationsPerInvoke = Pairs)]
    public float VectorKitCosine()
    {
        float total = 0;
        for (int p = 0; p < Pairs; p++)
        {
            total += VectorDistance.CosineSimilarity(X(p), Y(p));
        }

        return total;
    }

    // Pair p: x row p mod pool against y row (7p + 3) mod pool, so consecutive pairs do not reuse a row.
    private ReadOnlySpan<float> X(int p) => _x.AsSpan(p % _pool * Dimension, Dimension);

    private ReadOnlySpan<float> Y(int p) => _y.AsSpan(((7 * p) + 3) % _pool * Dimension, Dimension);
}
