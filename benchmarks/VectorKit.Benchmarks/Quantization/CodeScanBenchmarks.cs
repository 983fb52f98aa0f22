using BenchmarkDotNet.Attributes;
using VectorKit.Distance.Kernels;
using VectorKit.Quantization;

namespace VectorKit.Benchmarks.Quantization;

/// <summary>
/// What an inverted-file probe costs per stored vector, d = 128, squared L2: the float32 one-against-many kernel over
/// 512-byte rows (baseline), the 8-bit code kernel over 128-byte codes, and the product-code ADC scan over 64-byte codes
/// (with its per-list table fill timed separately). 4,096 vectors per invocation, all in L2/L3 (2 MiB of float32 rows).
/// Times are per vector (OperationsPerInvoke = 4,096).
/// </summary>
[KernelJob]
public class CodeScanBenchmarks
{
    private const int Dimension = 128;
    private const int Rows = 4096;

    private float[] _query = [];
    private float[] _rows = [];
    private float[] _results = [];
    private byte[] _scalarCodes = [];
    private byte[] _productCodes = [];
    private float[] _paddedQuery = [];
    private float[] _table = [];
    private ScalarQuantizer _scalar = null!;
    private ProductQuantizer _product = null!;

    [GlobalSetup]
    public void Setup()
    {
        _query = TestData.Random(Dimension, seed: 3);
        _rows = TestData.Random(Rows * Dimension, seed: 4);
        _results = new float[Rows];
        _scalar = ScalarQuantizer.Train(_rows, Dimension);
        _product = ProductQuantizer.Train(_rows, Dimension, new ProductQuantizerOptions { CodeBytes = 64, MaxIterations = 4 });
        _scalarCodes = new byte[Rows * _scalar.CodeBytes];
        _productCodes = new byte[Rows * 64];
        for (int r = 0; r < Rows; r++)
        {
            _scalar.Encode(_rows.AsSpan(r * Dimension, Dimension), _scalarCodes.AsSpan(r * _scalar.CodeBytes, _scalar.CodeBytes));
            _product.Encode(_rows.AsSpan(r * Dimension, Dimension), _productCodes.AsSpan(r * 64, 64));
        }

        _paddedQuery = new float[_scalar.CodeBytes];
        _scalar.Pad(_query, _paddedQuery);
        _table = new float[_product.TableLength];
        _product.ComputeSquaredDistanceTable(_query, _table);
    }

    [Benchmark(Baseline = true, OperationsPerInvoke = Rows)]
    public float Float32Rows()
    {
        ManyKernel.Compute<SquaredDifferenceStep>(KernelDispatch.Widest, ref _query[0], ref _rows[0], Dimension, Rows, ref _results[0]);
        return _results[Rows - 1];
    }

    [Benchmark(OperationsPerInvoke = Rows)]
    public float Scalar8BitCodes()
    {
        _scalar.Compute<SquaredDifferenceStep>(KernelDispatch.Widest, ref _paddedQuery[0], ref _scalarCodes[0], Rows, ref _results[0]);
        return _results[Rows - 1];
    }

    [Benchmark(OperationsPerInvoke = Rows)]
    public float ProductCodesAdc()
    {
        _product.Scan(ref _table[0], ref _productCodes[0], Rows, ref _results[0]);
        return _results[Rows - 1];
    }

    /// <summary>One 64 × 256 table fill, as once per probed list; reported per table, not per vector.</summary>
    [Benchmark]
    public float ProductTableFill()
    {
        _product.FillTable(_query, _table, squared: true);
        return _table[^1];
    }
}
