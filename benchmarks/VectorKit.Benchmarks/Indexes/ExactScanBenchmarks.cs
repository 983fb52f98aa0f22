using System.Runtime.CompilerServices;
using System.Runtime.InteropServices;
using System.Runtime.Intrinsics;
using BenchmarkDotNet.Attributes;
using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;

namespace VectorKit.Benchmarks.Indexes;

/// <summary>
/// A single-query exact search (top 10, squared L2, one thread) over 60,000 × 784 floats (188 MB, far beyond cache),
/// against the baseline of a plain vectorised read of an equally sized separate buffer.
/// </summary>
/// <remarks>
/// <para>The scan reads every stored float once, as the plain read does, so time(read) / time(scan) is the fraction of
/// the single-thread memory bandwidth the scan reaches. The index scans its own storage; the reads sum another
/// 64-byte-aligned native buffer holding the same values (the index's storage is allocated the same way).</para>
/// <para><see cref="PlainRead"/> streams the buffer front to back (one stream). <see cref="PlainReadFourRows"/> reads
/// it in the order the scan does, four rows side by side (four streams), which lets the hardware prefetch more
/// at once; it shows whether a single stream is the right ceiling.</para>
/// <para>Data: Fashion-MNIST's training images when present (see <see cref="TestData"/>), else seeded random.</para>
/// </remarks>
[KernelJob]
public unsafe class ExactScanBenchmarks
{
    private const int Count = 60_000;
    private const int K = 10;

    private readonly SearchHit[] _hits = new SearchHit[K];
    private ExactIndex? _index;
    private float* _plain;
    private float[] _query = [];

    [GlobalSetup]
    public void Setup()
    {
        int d = TestData.ImageDimension;
        float[] train = TestData.Images(TestData.FashionTrainImages, Count, seed: 5, out string trainSource);
        float[] test = TestData.Images(TestData.FashionTestImages, 1, seed: 6, out string testSource);
        Console.WriteLine($"// Base: {trainSource}; query: {testSource}");
        var ids = new long[Count];
        for (int i = 0; i < ids.Length; i++)
        {
            ids[i] = i;
        }

        _index = new ExactIndex(d, DistanceMetric.SquaredEuclidean, new ExactIndexOptions { InitialCapacity = Count });
        _index.AddRange(ids, train);
        _plain = (float*)NativeMemory.AlignedAlloc((nuint)train.Length * sizeof(float), 64);
        train.CopyTo(new Span<float>(_plain, train.Length));
        _query = test;
    }

    [GlobalCleanup]
    public void Cleanup()
    {
        _index?.Dispose();
        NativeMemory.AlignedFree(_plain);
        _plain = null;
    }

    [Benchmark(Baseline = true)]
    public float PlainRead() => StreamingSum(ref *_plain, (nuint)Count * TestData.ImageDimension);

    [Benchmark]
    public float PlainReadFourRows() => FourRowSum(ref *_plain, Count, TestData.ImageDimension);

    [Benchmark]
    public float ExactSearchTop10()
    {
        _index!.Search(_query, _hits);
        return _hits[0].Distance;
    }

    // Four independent accumulators of the widest vector, so the adds never wait on each other and the loop is
    // bound by loads from memory. No tail: the buffer's length is a multiple of four vectors.
    private static float StreamingSum(ref float start, nuint n)
    {
        nuint i = 0;
        if (Vector512.IsHardwareAccelerated)
        {
            Vector512<float> s0 = default, s1 = default, s2 = default, s3 = default;
            nuint w = (nuint)Vector512<float>.Count;
            for (; i + (4 * w) <= n; i += 4 * w)
            {
                s0 += Vector512.LoadUnsafe(ref start, i);
                s1 += Vector512.LoadUnsafe(ref start, i + w);
                s2 += Vector512.LoadUnsafe(ref start, i + (2 * w));
                s3 += Vector512.LoadUnsafe(ref start, i + (3 * w));
            }

            return Vector512.Sum((s0 + s1) + (s2 + s3));
        }
        else
        {
            Vector256<float> s0 = default, s1 = default, s2 = default, s3 = default;
            nuint w = (nuint)Vector256<float>.Count;
            for (; i + (4 * w) <= n; i += 4 * w)
            {
                s0 += Vector256.LoadUnsafe(ref start, i);
                s1 += Vector256.LoadUnsafe(ref start, i + w);
                s2 += Vector256.LoadUnsafe(ref start, i + (2 * w));
                s3 += Vector256.LoadUnsafe(ref start, i + (3 * w));
            }

            return Vector256.Sum((s0 + s1) + (s2 + s3));
        }
    }

    // Rows four at a time, one accumulator per row, lane by lane across the four: the scan's access order.
    // 784 is a multiple of 16 and 60,000 of 4, so there are no tails.
    private static float FourRowSum(ref float start, int rows, int dimension)
    {
        Vector512<float> s0 = default, s1 = default, s2 = default, s3 = default;
        nuint d = (nuint)dimension;
        nuint w = (nuint)Vector512<float>.Count;
        for (nuint r = 0; r + 4 <= (nuint)rows; r += 4)
        {
            ref float x0 = ref Unsafe.Add(ref start, r * d);
            ref float x1 = ref Unsafe.Add(ref x0, d);
            ref float x2 = ref Unsafe.Add(ref x1, d);
            ref float x3 = ref Unsafe.Add(ref x2, d);
            for (nuint i = 0; i + w <= d; i += w)
            {
                s0 += Vector512.LoadUnsafe(ref x0, i);
                s1 += Vector512.LoadUnsafe(ref x1, i);
                s2 += Vector512.LoadUnsafe(ref x2, i);
                s3 += Vector512.LoadUnsafe(ref x3, i);
            }
        }

        return Vector512.Sum((s0 + s1) + (s2 + s3));
    }
}
