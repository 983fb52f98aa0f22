using System.Diagnostics;
using System.Runtime.CompilerServices;
using System.Runtime.InteropServices;

namespace VectorKit.Distance.Kernels;

/// <summary>Kernels over one pair of vectors: a sum of per-component steps, and the fused cosine parts.</summary>
/// <remarks>
/// Four independent accumulators hide the FMA latency. The tail is one overlapping lane ending at the last
/// component, with the lanes already summed masked to zero, so no scalar loop runs and the order of summation
/// depends only on the length, never on where the buffers start.
/// </remarks>
internal static class PairKernel
{
    public static float Sum<TStep>(KernelPath widest, ReadOnlySpan<float> a, ReadOnlySpan<float> b)
        where TStep : struct, IAccumulateStep
    {
        Debug.Assert(a.Length == b.Length);
        if (a.Length == 0)
        {
            return 0f;
        }

        ref float x = ref MemoryMarshal.GetReference(a);
        ref float y = ref MemoryMarshal.GetReference(b);
        return KernelDispatch.For(a.Length, widest) switch
        {
            KernelPath.Vector512 => Sum<TStep, Lane512>(ref x, ref y, a.Length),
            KernelPath.Vector256 => Sum<TStep, Lane256>(ref x, ref y, a.Length),
            KernelPath.Vector128 => Sum<TStep, Lane128>(ref x, ref y, a.Length),
            _ => Sum<TStep, LaneScalar>(ref x, ref y, a.Length),
        };
    }

    /// <summary>Computes <c>a·b</c>, <c>a·a</c> and <c>b·b</c> in one pass.</summary>
    public static void CosineParts(KernelPath widest, ReadOnlySpan<float> a, ReadOnlySpan<float> b, out float dot, out float aa, out float bb)
    {
        Debug.Assert(a.Length == b.Length);
        if (a.Length == 0)
        {
            dot = aa = bb = 0f;
            return;
        }

        ref float x = ref MemoryMarshal.GetReference(a);
        ref float y = ref MemoryMarshal.GetReference(b);
        switch (KernelDispatch.For(a.Length, widest))
        {
            case KernelPath.Vector512: CosineParts<Lane512>(ref x, ref y, a.Length, out dot, out aa, out bb); break;
            case KernelPath.Vector256: CosineParts<Lane256>(ref x, ref y, a.Length, out dot, out aa, out bb); break;
            case KernelPath.Vector128: CosineParts<Lane128>(ref x, ref y, a.Length, out dot, out aa, out bb); break;
            default: CosineParts<LaneScalar>(ref x, ref y, a.Length, out dot, out aa, out bb); break;
        }
    }

    private static float Sum<TStep, TLane>(ref float a, ref float b, int length)
        where TStep : struct, IAccumulateStep
        where TLane : struct, IVectorLane<TLane>
    {
        nint width = TLane.Count;
        nint n = length;
        nint i = 0;
        TLane s0 = TLane.Zero, s1 = TLane.Zero, s2 = TLane.Zero, s3 = TLane.Zero;
        for (; i <= n - (4 * width); i += 4 * width)
        {
            s0 = TStep.Step(s0, TLane.Load(ref a, i), TLane.Load(ref b, i));
            s1 = TStep.Step(s1, TLane.Load(ref a, i + width), TLane.Load(ref b, i + width));
            s2 = TStep.Step(s2, TLane.Load(ref a, i + (2 * width)), TLane.Load(ref b, i + (2 * width)));
            s3 = TStep.Step(s3, TLane.Load(ref a, i + (3 * width)), TLane.Load(ref b, i + (3 * width)));
        }

        for (; i <= n - width; i += width)
        {
            s0 = TStep.Step(s0, TLane.Load(ref a, i), TLane.Load(ref b, i));
        }

        if (i < n)
        {
            nint last = n - width;
            int skip = (int)(i - last);
            s1 = TStep.Step(s1, TLane.LoadSkipping(ref a, last, skip), TLane.LoadSkipping(ref b, last, skip));
        }

        return TLane.Sum(TLane.Add(TLane.Add(s0, s1), TLane.Add(s2, s3)));
    }

    // Never inlined: inlined into a large caller at tier 1 (the dispatcher, and through it the caller's loop) the
    // lane structs were no longer kept in registers and the kernel ran several times slower on the one-against-many
    // benchmark. A call per block of rows costs nothing measurable.
    [MethodImpl(MethodImplOptions.NoInlining | MethodImplOptions.AggressiveOptimization)]
    private static void CosineParts<TLane>(ref float a, ref float b, int length, out float dot, out float aa, out float bb)
        where TLane : struct, IVectorLane<TLane>
    {
        nint width = TLane.Count;
        nint n = length;
        nint i = 0;
        TLane d0 = TLane.Zero, d1 = TLane.Zero, p0 = TLane.Zero, p1 = TLane.Zero, q0 = TLane.Zero, q1 = TLane.Zero;
        for (; i <= n - (2 * width); i += 2 * width)
        {
            TLane x0 = TLane.Load(ref a, i), y0 = TLane.Load(ref b, i);
            TLane x1 = TLane.Load(ref a, i + width), y1 = TLane.Load(ref b, i + width);
            d0 = TLane.MultiplyAdd(x0, y0, d0);
            p0 = TLane.MultiplyAdd(x0, x0, p0);
            q0 = TLane.MultiplyAdd(y0, y0, q0);
            d1 = TLane.MultiplyAdd(x1, y1, d1);
            p1 = TLane.MultiplyAdd(x1, x1, p1);
            q1 = TLane.MultiplyAdd(y1, y1, q1);
        }

        if (i <= n - width)
        {
            TLane x0 = TLane.Load(ref a, i), y0 = TLane.Load(ref b, i);
            d0 = TLane.MultiplyAdd(x0, y0, d0);
            p0 = TLane.MultiplyAdd(x0, x0, p0);
            q0 = TLane.MultiplyAdd(y0, y0, q0);
            i += width;
        }

        if (i < n)
        {
            nint last = n - width;
            int skip = (int)(i - last);
            TLane x1 = TLane.LoadSkipping(ref a, last, skip), y1 = TLane.LoadSkipping(ref b, last, skip);
            d1 = TLane.MultiplyAdd(x1, y1, d1);
            p1 = TLane.MultiplyAdd(x1, x1, p1);
            q1 = TLane.MultiplyAdd(y1, y1, q1);
        }

        // Three horizontal sums dominate at small d: Vector512.Sum reduces each 128-bit quarter separately (about 25
        // instructions in the generated code), folding halves takes about 8.
        dot = TLane.SumByHalves(TLane.Add(d0, d1));
        aa = TLane.SumByHalves(TLane.Add(p0, p1));
        bb = TLane.SumByHalves(TLane.Add(q0, q1));
    }
}
