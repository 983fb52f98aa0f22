using System.Diagnostics;
using System.Runtime.CompilerServices;

namespace VectorKit.Distance.Kernels;

/// <summary>One query against many stored rows laid out contiguously (row <c>r</c> starts at <c>r × dimension</c>).</summary>
/// <remarks>
/// <para>Rows are processed four at a time so each query lane is loaded once for four rows: 2 accumulators per row,
/// 8 in all, keep both FMA pipes busy while loads stay under the two-per-cycle limit.</para>
/// <para>Every row is summed by the same fixed schedule whether it is processed in a group of four or alone
/// (<see cref="One{TStep}"/>): even lanes into accumulator 0, odd lanes into 1, the masked overlapping tail into
/// the accumulator whose turn it is. A row's distance is therefore bit-identical however the scan is blocked,
/// filtered or re-scored, which keeps single and batch search results the same.</para>
/// </remarks>
internal static class ManyKernel
{
    /// <summary>Writes the step-sum of <paramref name="query"/> with each of <paramref name="rowCount"/> rows into <paramref name="results"/>.</summary>
    public static void Compute<TStep>(KernelPath widest, ref float query, ref float rows, int dimension, int rowCount, ref float results)
        where TStep : struct, IAccumulateStep
    {
        Debug.Assert(dimension > 0);
        switch (KernelDispatch.For(dimension, widest))
        {
            case KernelPath.Vector512: Compute<TStep, Lane512>(ref query, ref rows, dimension, rowCount, ref results); break;
            case KernelPath.Vector256: Compute<TStep, Lane256>(ref query, ref rows, dimension, rowCount, ref results); break;
            case KernelPath.Vector128: Compute<TStep, Lane128>(ref query, ref rows, dimension, rowCount, ref results); break;
            default: Compute<TStep, LaneScalar>(ref query, ref rows, dimension, rowCount, ref results); break;
        }
    }

    /// <summary>The step-sum of <paramref name="query"/> with one row, bit-identical to what <see cref="Compute{TStep}"/> gives that row.</summary>
    public static float One<TStep>(KernelPath widest, ref float query, ref float row, int dimension)
        where TStep : struct, IAccumulateStep
    {
        Debug.Assert(dimension > 0);
        return KernelDispatch.For(dimension, widest) switch
        {
            KernelPath.Vector512 => One<TStep, Lane512>(ref query, ref row, dimension),
            KernelPath.Vector256 => One<TStep, Lane256>(ref query, ref row, dimension),
            KernelPath.Vector128 => One<TStep, Lane128>(ref query, ref row, dimension),
            _ => One<TStep, LaneScalar>(ref query, ref row, dimension),
        };
    }

    // Never inlined: inlined into a large caller at tier 1 (the dispatcher, and through it the caller's loop) the
    // lane structs were no longer kept in registers and the kernel ran several times slower on the one-against-many
    // benchmark. A call per block of rows costs nothing measurable.
    [MethodImpl(MethodImplOptions.NoInlining | MethodImplOptions.AggressiveOptimization)]
    private static void Compute<TStep, TLane>(ref float query, ref float rows, int dimension, int rowCount, ref float results)
        where TStep : struct, IAccumulateStep
        where TLane : struct, IVectorLane<TLane>
    {
        nint stride = dimension;
        nint r = 0;
        for (; r <= rowCount - 4; r += 4)
        {
            ref float x0 = ref Unsafe.Add(ref rows, r * stride);
            Four<TStep, TLane>(ref query, ref x0, stride, dimension, ref Unsafe.Add(ref results, r));
        }

        for (; r < rowCount; r++)
        {
            Unsafe.Add(ref results, r) = One<TStep, TLane>(ref query, ref Unsafe.Add(ref rows, r * stride), dimension);
        }
    }

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    private static void Four<TStep, TLane>(ref float q, ref float x0, nint stride, int dimension, ref float results)
        where TStep : struct, IAccumulateStep
        where TLane : struct, IVectorLane<TLane>
    {
        ref float x1 = ref Unsafe.Add(ref x0, stride);
        ref float x2 = ref Unsafe.Add(ref x1, stride);
        ref float x3 = ref Unsafe.Add(ref x2, stride);
        nint width = TLane.Count;
        nint n = dimension;
        nint i = 0;
        TLane a0 = TLane.Zero, a1 = TLane.Zero, b0 = TLane.Zero, b1 = TLane.Zero;
        TLane c0 = TLane.Zero, c1 = TLane.Zero, d0 = TLane.Zero, d1 = TLane.Zero;
        for (; i <= n - (2 * width); i += 2 * width)
        {
            TLane q0 = TLane.Load(ref q, i);
            TLane q1 = TLane.Load(ref q, i + width);
            a0 = TStep.Step(a0, q0, TLane.Load(ref x0, i));
            b0 = TStep.Step(b0, q0, TLane.Load(ref x1, i));
            c0 = TStep.Step(c0, q0, TLane.Load(ref x2, i));
            d0 = TStep.Step(d0, q0, TLane.Load(ref x3, i));
            a1 = TStep.Step(a1, q1, TLane.Load(ref x0, i + width));
            b1 = TStep.Step(b1, q1, TLane.Load(ref x1, i + width));
            c1 = TStep.Step(c1, q1, TLane.Load(ref x2, i + width));
            d1 = TStep.Step(d1, q1, TLane.Load(ref x3, i + width));
        }

        if (i <= n - width)
        {
            TLane q0 = TLane.Load(ref q, i);
            a0 = TStep.Step(a0, q0, TLane.Load(ref x0, i));
            b0 = TStep.Step(b0, q0, TLane.Load(ref x1, i));
            c0 = TStep.Step(c0, q0, TLane.Load(ref x2, i));
            d0 = TStep.Step(d0, q0, TLane.Load(ref x3, i));
            i += width;
        }

        if (i < n)
        {
            // One lane ending at the last component; the lanes summed above are masked to zero on both sides.
            nint last = n - width;
            int skip = (int)(i - last);
            TLane q1 = TLane.LoadSkipping(ref q, last, skip);
            a1 = TStep.Step(a1, q1, TLane.LoadSkipping(ref x0, last, skip));
            b1 = TStep.Step(b1, q1, TLane.LoadSkipping(ref x1, last, skip));
            c1 = TStep.Step(c1, q1, TLane.LoadSkipping(ref x2, last, skip));
            d1 = TStep.Step(d1, q1, TLane.LoadSkipping(ref x3, last, skip));
        }

        results = TLane.Sum(TLane.Add(a0, a1));
        Unsafe.Add(ref results, 1) = TLane.Sum(TLane.Add(b0, b1));
        Unsafe.Add(ref results, 2) = TLane.Sum(TLane.Add(c0, c1));
        Unsafe.Add(ref results, 3) = TLane.Sum(TLane.Add(d0, d1));
    }

    /// <summary>
    /// <see cref="One{TStep}"/> at a width already chosen by <see cref="KernelDispatch.For"/>: for callers that measure
    /// many rows against one query and resolve the width once, so this body inlines into their loop.
    /// </summary>
    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    internal static float One<TStep, TLane>(ref float q, ref float x, int dimension)
        where TStep : struct, IAccumulateStep
        where TLane : struct, IVectorLane<TLane>
    {
        // The same schedule as Four, for one row.
        nint width = TLane.Count;
        nint n = dimension;
        nint i = 0;
        TLane a0 = TLane.Zero, a1 = TLane.Zero;
        for (; i <= n - (2 * width); i += 2 * width)
        {
            a0 = TStep.Step(a0, TLane.Load(ref q, i), TLane.Load(ref x, i));
            a1 = TStep.Step(a1, TLane.Load(ref q, i + width), TLane.Load(ref x, i + width));
        }

        if (i <= n - width)
        {
            a0 = TStep.Step(a0, TLane.Load(ref q, i), TLane.Load(ref x, i));
            i += width;
        }

        if (i < n)
        {
            nint last = n - width;
            int skip = (int)(i - last);
            a1 = TStep.Step(a1, TLane.LoadSkipping(ref q, last, skip), TLane.LoadSkipping(ref x, last, skip));
        }

        return TLane.Sum(TLane.Add(a0, a1));
    }
}
