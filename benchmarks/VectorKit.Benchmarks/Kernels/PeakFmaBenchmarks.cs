using System.Runtime.Intrinsics;
using BenchmarkDotNet.Attributes;

namespace VectorKit.Benchmarks.Kernels;

/// <summary>
/// The machine's single-thread peak of fused multiply-adds: twelve independent FMA chains held in registers, no
/// memory traffic. Times are per vector FMA instruction; multiply-adds per second = lanes / time.
/// </summary>
/// <remarks>
/// Twelve chains cover latency × throughput (4 cycles × 2 per cycle = 8 in flight on current x64 cores, common
/// practice) with room to spare. Each chain computes acc·m + c with m just under 1, so values settle near
/// c / (1 − m) and never overflow or turn subnormal, which would slow the FMA units.
/// </remarks>
[KernelJob]
public class PeakFmaBenchmarks
{
    private const int Iterations = 1 << 20;
    private const int Chains = 12;

    private float _multiplier;
    private float _addend;

    [GlobalSetup]
    public void Setup()
    {
        _multiplier = 0.999f;
        _addend = 0.001f;
    }

    [Benchmark(OperationsPerInvoke = Iterations * Chains)]
    public float Vector512Fma()
    {
        if (!Vector512.IsHardwareAccelerated)
        {
            return float.NaN;
        }

        Vector512<float> m = Vector512.Create(_multiplier), c = Vector512.Create(_addend);
        Vector512<float> a0 = c, a1 = c * 2, a2 = c * 3, a3 = c * 4, a4 = c * 5, a5 = c * 6;
        Vector512<float> a6 = c * 7, a7 = c * 8, a8 = c * 9, a9 = c * 10, a10 = c * 11, a11 = c * 12;
        for (int i = 0; i < Iterations; i++)
        {
            a0 = Vector512.FusedMultiplyAdd(a0, m, c); a1 = Vector512.FusedMultiplyAdd(a1, m, c);
            a2 = Vector512.FusedMultiplyAdd(a2, m, c); a3 = Vector512.FusedMultiplyAdd(a3, m, c);
            a4 = Vector512.FusedMultiplyAdd(a4, m, c); a5 = Vector512.FusedMultiplyAdd(a5, m, c);
            a6 = Vector512.FusedMultiplyAdd(a6, m, c); a7 = Vector512.FusedMultiplyAdd(a7, m, c);
            a8 = Vector512.FusedMultiplyAdd(a8, m, c); a9 = Vector512.FusedMultiplyAdd(a9, m, c);
            a10 = Vector512.FusedMultiplyAdd(a10, m, c); a11 = Vector512.FusedMultiplyAdd(a11, m, c);
        }

        return Vector512.Sum(a0 + a1 + a2 + a3 + a4 + a5 + a6 + a7 + a8 + a9 + a10 + a11);
    }

    [Benchmark(OperationsPerInvoke = Iterations * Chains)]
    public float Vector256Fma()
    {
        Vector256<float> m = Vector256.Create(_multiplier), c = Vector256.Create(_addend);
        Vector256<float> a0 = c, a1 = c * 2, a2 = c * 3, a3 = c * 4, a4 = c * 5, a5 = c * 6;
        Vector256<float> a6 = c * 7, a7 = c * 8, a8 = c * 9, a9 = c * 10, a10 = c * 11, a11 = c * 12;
        for (int i = 0; i < Iterations; i++)
        {
            a0 = Vector256.FusedMultiplyAdd(a0, m, c); a1 = Vector256.FusedMultiplyAdd(a1, m, c);
            a2 = Vector256.FusedMultiplyAdd(a2, m, c); a3 = Vector256.FusedMultiplyAdd(a3, m, c);
            a4 = Vector256.FusedMultiplyAdd(a4, m, c); a5 = Vector256.FusedMultiplyAdd(a5, m, c);
            a6 = Vector256.FusedMultiplyAdd(a6, m, c); a7 = Vector256.FusedMultiplyAdd(a7, m, c);
            a8 = Vector256.FusedMultiplyAdd(a8, m, c); a9 = Vector256.FusedMultiplyAdd(a9, m, c);
            a10 = Vector256.FusedMultiplyAdd(a10, m, c); a11 = Vector256.FusedMultiplyAdd(a11, m, c);
        }

        return Vector256.Sum(a0 + a1 + a2 + a3 + a4 + a5 + a6 + a7 + a8 + a9 + a10 + a11);
    }
}
