using BenchmarkDotNet.Attributes;
using VectorKit.Distance.Kernels;
using VectorKit.Quantization;

namespace VectorKit.Benchmarks.Quantization;

/// <summary>
/// Codes scanned per second at equal bytes per vector (d = 128, 64-byte codes, squared L2): the byte-layout ADC scan
/// (64 sub-spaces × 256 codewords, float table look-ups; baseline) against the four-bit fast scan (128 sub-spaces × 16
/// codewords, blocks of 32, 8-bit tables in registers) at the widest path. 4,096 codes per invocation (256 KiB of
/// codes, in L2); times are per code (OperationsPerInvoke = 4,096). The per-list table work is timed separately, per
/// table, as the inverted file does it under squared L2: the ADC fill, and for the fast scan the addition of the list's
/// stored terms to the query's, the 8-bit quantisation and the register image (the query's terms are filled once per
/// query, timed on their own).
/// </summary>
[KernelJob]
public class FastScanBenchmarks
{
    private const int Dimension = 128;
    private const int Rows = 4096;
    private const int CodeBytes = 64;

    private float[] _query = [];
    private float[] _results = [];
    private byte[] _productCodes = [];
    private byte[] _blocks = [];
    private float[] _table = [];
    private float[] _fastTable = [];
    private float[] _queryTerms = [];
    private float[] _listTerms = [];
    private byte[] _levels = [];
    private byte[] _image = [];
    private ushort[] _sums = [];
    private ProductQuantizer _product = null!;
    private FourBitQuantizer _fourBit = null!;

    [GlobalSetup]
    public void Setup()
    {
        _query = TestData.Random(Dimension, seed: 3);
        float[] rows = TestData.Random(Rows * Dimension, seed: 4);
        _results = new float[Rows];
        _product = ProductQuantizer.Train(rows, Dimension, new ProductQuantizerOptions { CodeBytes = CodeBytes, MaxIterations = 4 });
        _fourBit = FourBitQuantizer.Train(rows, Dimension, CodeBytes, SubspaceRotation.None, 4, 42, Environment.ProcessorCount, null, default);
        _productCodes = new byte[Rows * CodeBytes];
        _blocks = new byte[FastScanKernel.ListBytes(Rows, CodeBytes)];
        var code = new byte[CodeBytes];
        for (int r = 0; r < Rows; r++)
        {
            _product.Encode(rows.AsSpan(r * Dimension, Dimension), _productCodes.AsSpan(r * CodeBytes, CodeBytes));
            _fourBit.EncodeUnchecked(rows.AsSpan(r * Dimension, Dimension), code);
            FastScanKernel.Put(_blocks, CodeBytes, r, code);
        }

        _table = new float[_product.TableLength];
        _product.ComputeSquaredDistanceTable(_query, _table);
        _fastTable = new float[_fourBit.TableLength];
        _queryTerms = new float[_fourBit.TableLength];
        _listTerms = new float[_fourBit.TableLength];
        _fourBit.FillDotTerms(_query, _queryTerms, -2f);
        _fourBit.FillListTerms(TestData.Random(Dimension, seed: 5), _listTerms);
        _levels = new byte[_fourBit.TableLength];
        _image = new byte[CodeBytes * FastScanKernel.ImageBytesPerCodeByte];
        _sums = new ushort[Rows];
        PrepareFastScanTable();
    }

    [Benchmark(Baseline = true, OperationsPerInvoke = Rows)]
    public float ProductCodesAdc()
    {
        _product.Scan(ref _table[0], ref _productCodes[0], Rows, ref _results[0]);
        return _results[Rows - 1];
    }

    [Benchmark(OperationsPerInvoke = Rows)]
    public int FourBitFastScan()
    {
        FastScanKernel.Scan(KernelDispatch.Widest, ref _image[0], ref _blocks[0], CodeBytes, Rows / FastScanKernel.BlockSize, ref _sums[0]);
        return _sums[Rows - 1];
    }

    /// <summary>The fast scan plus turning each sum into a float distance (what the index does before its bound check).</summary>
    [Benchmark(OperationsPerInvoke = Rows)]
    public float FourBitFastScanToFloat()
    {
        FastScanKernel.Scan(KernelDispatch.Widest, ref _image[0], ref _blocks[0], CodeBytes, Rows / FastScanKernel.BlockSize, ref _sums[0]);
        for (int i = 0; i < Rows; i++)
        {
            _results[i] = 0.5f + (0.01f * _sums[i]);
        }

        return _results[Rows - 1];
    }

    /// <summary>One 64 × 256 ADC table fill, as once per probed list; per table.</summary>
    [Benchmark]
    public float ProductTableFill()
    {
        _product.FillTable(_query, _table, squared: true);
        return _table[^1];
    }

    /// <summary>The query's 128 × 16 table terms, once per query; per table.</summary>
    [Benchmark]
    public float FastScanQueryTerms()
    {
        _fourBit.FillDotTerms(_query, _queryTerms, -2f);
        return _queryTerms[^1];
    }

    /// <summary>One 128 × 16 list table (query terms + stored list terms), its 8-bit quantisation and register image, as once per probed list; per table.</summary>
    [Benchmark]
    public float FastScanTablePrepare() => PrepareFastScanTable();

    private float PrepareFastScanTable()
    {
        System.Numerics.Tensors.TensorPrimitives.Add(_queryTerms, _listTerms, _fastTable);
        (float bias, float step) = FastScanKernel.QuantizeTable(_fastTable, _fourBit.Subspaces, _levels);
        FastScanKernel.PrepareImage(KernelDispatch.Widest, _levels, CodeBytes, _image);
        return bias + step;
    }
}
